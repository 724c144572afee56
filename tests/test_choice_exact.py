"""The exact DP under choice demand: brute force, the independent-demand special case, kernels."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rmkit import BookingState, ProblemTooLargeError, get_solver
from rmkit.methods.shared.choice_dp import feasible_masks, solve_choice_dp
from rmkit.methods.shared.network_dp import grid_states
from rmkit.model.choice import ChoiceDemand
from tests.choice_instances import (
    brute_force_choice_values,
    disjoint_choice,
    parallel_flights,
    tiny_choice,
)
from tests.instances import small_problem


@pytest.mark.parametrize("seed", range(3))
def test_equals_brute_force_with_disjoint_segments(seed):
    """Segments with disjoint consideration sets (one per component, v_0 = 0 for one of them):
    the values equal the brute force."""
    net, dem = disjoint_choice(seed)
    values = brute_force_choice_values(net, dem)
    dp = solve_choice_dp(net, dem)
    for x, v in values[0].items():
        assert dp.value_at(list(x)) == pytest.approx(v, rel=1e-12, abs=1e-9)


@pytest.mark.parametrize("seed", range(6))
def test_equals_brute_force_enumeration(seed):
    """Every state and period against the plain recursion over all offer sets (tests-only code)."""
    net, dem = tiny_choice(seed)
    values = brute_force_choice_values(net, dem)
    dp = solve_choice_dp(net, dem)
    for x, v in values[0].items():
        assert dp.value_at(list(x)) == pytest.approx(v, rel=1e-12, abs=1e-9)
    res = get_solver("exact").solve(net, dem, state=BookingState(period=2))
    c = tuple(int(v) for v in net.capacities)
    assert res.value == pytest.approx(values[2][c], rel=1e-12)


def test_one_segment_per_product_is_independent_exact_bit_for_bit():
    net, ind = small_problem()
    ch = ChoiceDemand.independent_equivalent(ind.probabilities)
    a, b = get_solver("exact").solve(net, ind), get_solver("exact").solve(net, ch)
    assert a.value == b.value
    np.testing.assert_array_equal(a.policy.bits, b.policy.bits)
    np.testing.assert_array_equal(a.policy.values, b.policy.values)
    np.testing.assert_array_equal(a["bid_price"], b["bid_price"])
    ma = get_solver("exact").marginal_values(net, ind, np.array([3]), net.capacities[None, :])
    mb = get_solver("exact").marginal_values(net, ch, np.array([3]), net.capacities[None, :])
    np.testing.assert_array_equal(ma[0], mb[0])


def test_stored_sets_only_hold_products_with_seats():
    net, dem = tiny_choice(4, n_legs=2, max_capacity=2, n_products=5)
    res = get_solver("exact").solve(net, dem)
    bits = np.unpackbits(res.policy.bits, axis=2, bitorder="little")[:, :, : net.n_products]
    feas = feasible_masks(net)
    ok = (feas[:, None] >> np.arange(net.n_products, dtype=np.uint64)[None, :]) & np.uint64(1)
    assert np.all(bits <= ok[None, :, :].astype(np.uint8))
    assert bits.any()


@settings(max_examples=15, deadline=None)
@given(seed=st.integers(0, 10_000))
def test_value_rises_with_capacity(seed):
    net, dem = tiny_choice(seed, n_legs=2, max_capacity=3, n_products=4, n_periods=4)
    dp = solve_choice_dp(net, dem)
    x = grid_states(net.capacities)
    for i in range(net.n_legs):
        up = x[:, i] < net.capacities[i]
        lo, hi = x[up], x[up].copy()
        hi[:, i] += 1
        assert np.all(dp.values[hi @ dp.strides] >= dp.values[lo @ dp.strides] - 1e-9)


def test_refuses_above_the_stated_size():
    net, dem = parallel_flights(1.0)
    solver = get_solver("exact", max_work=1e6)
    reason = solver.refusal_reason(net, dem)
    assert reason is not None and "64 offer sets x 64,821 states x 300 periods" in reason
    with pytest.raises(ProblemTooLargeError, match="max_work"):
        solver.solve(net, dem)


def test_kernel_equals_its_python_function():
    from rmkit.kernels import choice_dp, offer_sets

    net, dem = tiny_choice(2)
    compiled = solve_choice_dp(net, dem)
    swapped = [(m, n, getattr(m, n)) for m in (choice_dp, offer_sets)
               for n in ("choice_values", "add_best", "best_subset", "scratch") if hasattr(m, n)]
    try:
        for m, n, fn in swapped:
            setattr(m, n, fn.py_func)
        plain = solve_choice_dp(net, dem)
    finally:
        for m, n, fn in swapped:
            setattr(m, n, fn)
    np.testing.assert_array_equal(compiled.values, plain.values)
    np.testing.assert_array_equal(compiled.decision_bits, plain.decision_bits)


def test_choice_leg_dp_is_the_independent_leg_dp_for_one_segment_per_product():
    """The leg DPs of cdpd (Liu & van Ryzin 2008, sec. 4) under independent demand written as
    choice: the same bid-price tables as the independent leg DPs of dpd with the same duals."""
    from rmkit.methods.dpd import displaced_fares
    from rmkit.methods.shared.leg_dp import leg_tables, network_leg_values

    net, ind = small_problem()
    ch = ChoiceDemand.independent_equivalent(ind.probabilities)
    res = get_solver("cdpd").solve(net, ch)
    fares = displaced_fares(net, res.payload["cdlp_duals"])
    prob = ind.probabilities
    values = network_leg_values(prob, np.broadcast_to(fares[:, None, :], (net.n_legs,) + prob.shape), net)
    _, table = leg_tables(values)
    np.testing.assert_allclose(res["bid_price_table"], table, rtol=1e-12, atol=1e-9)


def test_leg_kernel_equals_its_python_function():
    from rmkit.kernels import choice_dp, offer_sets
    from rmkit.methods.shared.offer_sets import offer_sets as tabulate

    net, dem = tiny_choice(3, n_legs=2, max_capacity=3, n_products=5)
    sets = tabulate(dem)
    args = (*sets.arrays(), net.fares - 10.0, net.incidence[0].astype(np.uint8),
            int(net.capacities[0]))
    shape = (dem.n_periods + 1, int(net.capacities[0]) + 1)
    compiled, plain = np.zeros(shape), np.zeros(shape)
    choice_dp.choice_leg_values(*args, compiled)
    swapped = [(m, n, getattr(m, n)) for m, n in ((choice_dp, "add_best"), (choice_dp, "scratch"),
                                                  (offer_sets, "best_subset"))]
    try:
        for m, n, fn in swapped:
            setattr(m, n, fn.py_func)
        choice_dp.choice_leg_values.py_func(*args, plain)
    finally:
        for m, n, fn in swapped:
            setattr(m, n, fn)
    np.testing.assert_array_equal(compiled, plain)
    assert compiled[0, -1] > 0
