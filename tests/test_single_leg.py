"""The single-leg DP: kernels against plain Python, published Littlewood example, API facts."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import binom

from rmkit import InputError
from rmkit.kernels.single_leg import leg_values_batch, single_leg_values
from rmkit.methods.shared.leg_dp import leg_values, single_leg_dp


def plain_recursion(prob, fare, capacity):
    """V_t(x) straight from Talluri & van Ryzin (2004), section 2.5.1, with dicts and floats."""
    n_periods, n = prob.shape
    v = {n_periods: [0.0] * (capacity + 1)}
    for t in range(n_periods - 1, -1, -1):
        nxt = v[t + 1]
        row = [0.0]
        for x in range(1, capacity + 1):
            total = (1.0 - sum(prob[t])) * nxt[x]
            for j in range(n):
                accept = fare[t, j] + nxt[x - 1] if fare[t, j] > 0 else -np.inf
                total += prob[t, j] * max(nxt[x], accept)
            row.append(total)
        v[t] = row
    return np.array([v[t] for t in range(n_periods + 1)])


def random_leg(seed, n_periods=9, n=3, varying=True):
    rng = np.random.default_rng(seed)
    raw = rng.uniform(0.05, 1.0, (n_periods, n))
    prob = raw / raw.sum(axis=1, keepdims=True) * rng.uniform(0.3, 1.0)
    if varying:
        fare = rng.uniform(10, 300, (n_periods, n))
        fare[rng.uniform(size=fare.shape) < 0.2] = 0.0  # closed in some periods
    else:
        fare = np.broadcast_to(rng.uniform(10, 300, n), (n_periods, n)).copy()
    return prob, fare


@pytest.mark.parametrize("seed", range(6))
def test_kernel_matches_plain_python_recursion(seed):
    prob, fare = random_leg(seed)
    cap = 5
    out = np.empty((prob.shape[0] + 1, cap + 1))
    single_leg_values(prob, fare, cap, out)
    np.testing.assert_allclose(out, plain_recursion(prob, fare, cap), rtol=1e-12, atol=1e-12)


def test_kernel_matches_its_py_func_exactly():
    prob, fare = random_leg(11, n_periods=15, n=4)
    a = np.empty((16, 8))
    b = np.empty((16, 8))
    single_leg_values(prob, fare, 7, a)
    single_leg_values.py_func(prob, fare, 7, b)
    np.testing.assert_array_equal(a, b)


def test_batch_matches_single_and_py_func():
    prob, _ = random_leg(3, n_periods=12, n=4)
    rng = np.random.default_rng(5)
    fares = rng.uniform(-50, 250, (3, 12, 4))
    caps = np.array([4, 0, 9])
    out = np.full((3, 13, 10), -1.0)
    leg_values_batch(prob, fares, caps, out)
    ref = np.full((3, 13, 10), -1.0)
    leg_values_batch.py_func(prob, fares, caps, ref)
    np.testing.assert_array_equal(out, ref)
    for leg, c in enumerate(caps):
        one = np.empty((13, c + 1))
        single_leg_values(prob, fares[leg], int(c), one)
        np.testing.assert_array_equal(out[leg, :, : c + 1], one)
        assert np.all(np.isnan(out[leg, :, c + 1 :]))
    np.testing.assert_array_equal(leg_values(prob, fares, caps), out)


def test_littlewood_poisson_example():
    """Worked example 2 in shared/reference/worked-examples.md (Littlewood 1972 rule, [formula]).

    Fares 100 and 60; the low fare books first, then high-fare demand with mean 80. High-fare
    demand here is binomial over 4000 periods (chance 0.02 each), which the DP handles exactly;
    its tail at 78 and 79 straddles 0.6 just as the Poisson(80) tail does (0.6034 / 0.5594), so
    the optimal protection level for the high fare when the low fare closes is 78.
    """
    n_low, n_high, cap = 200, 4000, 150
    prob = np.zeros((n_low + n_high, 2))
    prob[:n_low, 1] = 0.9
    prob[n_low:, 0] = 80 / n_high
    dp = single_leg_dp(prob, np.array([100.0, 60.0]), cap)
    assert dp.protection_level[n_low - 1, 1] == 78
    # The seat values when the low fare closes are 100 P(D >= x), D ~ Binomial(4000, 0.02).
    x = np.arange(1, cap + 1)
    np.testing.assert_allclose(
        dp.seat_values[n_low, 1:], 100 * binom.sf(x - 1, n_high, 80 / n_high), rtol=1e-9, atol=1e-8
    )
    # With plenty of low-fare demand, the leg opens with exactly 78 seats held back for it.
    assert dp.value == pytest.approx(
        60 * (cap - 78) + 100 * float(np.sum(binom.sf(np.arange(78), n_high, 80 / n_high))),
        rel=1e-3,
    )


def test_one_seat_by_hand():
    dp = single_leg_dp(np.array([[0.3]]), np.array([10.0]), 1)
    assert dp.value == 3.0
    assert dp.bid_prices.tolist() == [[np.inf, 0.0]]


def test_protection_levels_reproduce_the_accept_decisions():
    prob, fare = random_leg(8, n_periods=20, n=4)
    dp = single_leg_dp(prob, fare, 10)
    y = dp.protection_level
    for t in range(20):
        for x in range(11):
            expected = (x > y[t]) & (fare[t] > 0)
            np.testing.assert_array_equal(dp.accept(t, x), expected)


def test_nested_levels_follow_fare_order():
    prob, fare = random_leg(2, n_periods=30, n=4, varying=False)
    y = single_leg_dp(prob, fare[0], 12).protection_level
    order = np.argsort(-fare[0])
    assert np.all(np.diff(y[:, order], axis=1) >= 0)  # lower fare, more seats held back


def test_bad_input_names_the_field():
    with pytest.raises(InputError, match="capacity"):
        single_leg_dp(np.array([[0.3]]), np.array([10.0]), -1)
    with pytest.raises(InputError, match=r"prob\[period 0\]"):
        single_leg_dp(np.array([[0.7, 0.6]]), np.array([10.0, 5.0]), 2)
    with pytest.raises(InputError, match="fares"):
        single_leg_dp(np.array([[0.3]]), np.array([[10.0, 5.0]]), 2)


def test_gathered_state_tables_equal_the_tables_of_every_leg_transposed():
    # the numbers dpd's states had before the gather (leg_tables over every solved leg, then a
    # transposed copy per state), NaN above each leg's capacity included
    from rmkit.kernels.single_leg import gather_leg_tables, leg_values_batch
    from rmkit.methods.shared.leg_dp import leg_tables

    rng = np.random.default_rng(8)
    n_periods, n = 12, 5
    prob = rng.uniform(0, 0.15, (n_periods, n))
    caps = np.array([3, 6, 4, 6, 2, 5])
    fares = np.broadcast_to(rng.uniform(10, 90, (caps.size, 1, n)), (caps.size, n_periods, n))
    solved = np.empty((caps.size, n_periods + 1, caps.max() + 1))
    leg_values_batch(prob, np.ascontiguousarray(fares), caps, solved)
    leg_value, table = leg_tables(solved)  # (T, cmax+1, every solved leg)
    for mine in (np.array([0, 3, 4]), np.array([5, 1]), np.array([2])):
        want_table = np.ascontiguousarray(table[:, :, mine])
        want_value = np.ascontiguousarray(leg_value[:, :, mine])
        for gather in (gather_leg_tables, gather_leg_tables.py_func):
            got_table, got_value = np.empty(want_table.shape), np.empty(want_value.shape)
            gather(solved, mine, got_table, got_value)
            np.testing.assert_array_equal(got_table, want_table)  # NaN where NaN, bit for bit
            np.testing.assert_array_equal(got_value, want_value)
            only_table = np.empty(want_table.shape)
            gather(solved, mine, only_table, np.empty((0, 0, 0)))
            np.testing.assert_array_equal(only_table, want_table)
    assert np.isnan(want_table).any()  # legs below the widest capacity are in the draw
