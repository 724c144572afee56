"""Structural facts of the decomposition methods on random small networks (hypothesis).

Sources: each leg value function of dpd and lr is a single-leg DP value, hence non-decreasing and
concave in the seats left (Talluri & van Ryzin 2004, section 2.5.1: the marginal value of a seat
does not increase with the seats left; Lee & Hersh 1993), for any fares. The Lagrangian bound
satisfies exact optimum <= LR bound for every fare split, and at its minimum LR <= DLP
(Topaloglu 2009, Operations Research 57(3):637-649, Proposition 1 [number from memory]); the
exact optimum comes from tests/instances.brute_force_values.
"""

from __future__ import annotations

import warnings

import numpy as np
from hypothesis import given
from hypothesis import strategies as st

from rmkit import BookingState, get_solver
from tests.instances import brute_force_values
from tests.properties.test_dp_properties import small_networks

TOL = 1e-9


def _solve(method, net, dem, state=None, **settings):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return get_solver(method, **settings).solve(net, dem, state=state)


def _check_leg_values(res, net):
    leg_value = res["leg_value"]
    for i, c in enumerate(net.capacities):
        v = leg_value[:, : c + 1, i]
        step = np.diff(v, axis=1)
        assert np.all(step >= -TOL * (1 + np.abs(v[:, 1:])))  # non-decreasing in seats
        assert np.all(np.diff(step, axis=1) <= TOL * (1 + np.abs(v[:, 2:])))  # concave


@given(small_networks(), st.sampled_from(["lr", "dpd"]), st.integers(0, 3))
def test_leg_values_non_decreasing_and_concave(problem, method, period_shift):
    net, dem = problem
    period = min(period_shift, dem.n_periods - 1)
    x = tuple(max(int(c) - 1, 0) for c in net.capacities)
    settings = {"max_iterations": 30} if method == "lr" else {}  # holds for any fare split
    _check_leg_values(_solve(method, net, dem, **settings), net)
    _check_leg_values(_solve(method, net, dem, state=BookingState(period, x), **settings), net)


@given(small_networks())
def test_exact_le_lr_le_dlp(problem):
    net, dem = problem
    exact = brute_force_values(net, dem)[0][tuple(int(c) for c in net.capacities)]
    res = _solve("lr", net, dem, max_iterations=400, tol=1e-4, stall_tol=0.0)
    dlp = get_solver("dlp").solve(net, dem).value
    assert res.value >= exact - TOL * max(1.0, exact)
    assert res.payload["lower_bound"] <= res.value + TOL
    assert res.value <= dlp * (1 + 1e-6) + TOL


@given(small_networks())
def test_lr_bid_prices_are_marginal_leg_values(problem):
    net, dem = problem
    res = _solve("lr", net, dem, max_iterations=30)
    table, leg_value = res["bid_price_table"], res["leg_value"]
    for i, c in enumerate(net.capacities):
        assert np.all(table[:, 1 : c + 1, i] >= -TOL)
        if dem.n_periods > 1:
            np.testing.assert_allclose(table[:-1, 1 : c + 1, i], np.diff(leg_value[1:, : c + 1, i],
                                                                          axis=1), atol=1e-9)
