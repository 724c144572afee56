"""Structural facts of the exact dynamic programs on random small instances (hypothesis).

Sources: monotonicity of the value function in capacity and time follows from the recursion
(Talluri & van Ryzin 2004, section 3.1: more seats or more time never hurt, since a policy can
ignore them). On one leg, the marginal value of a seat does not increase with the seats left and
does not increase as time runs out (Talluri & van Ryzin 2004, section 2.5.1, Proposition 2.21
[proposition number from memory]; Lee & Hersh 1993). The deterministic LP bounds the optimum
from above (Talluri & van Ryzin 2004, section 3.3.1, by Jensen's inequality).
"""

from __future__ import annotations

import numpy as np
from hypothesis import given
from hypothesis import strategies as st

from rmkit import get_solver
from rmkit.methods.shared.leg_dp import single_leg_dp
from rmkit.methods.shared.network_dp import grid_states, grid_strides, solve_network_dp
from tests.instances import random_problem

TOL = 1e-9


@st.composite
def small_networks(draw):
    seed = draw(st.integers(0, 10_000))
    n_legs = draw(st.integers(1, 3))
    return random_problem(
        seed,
        n_legs=n_legs,
        max_capacity=draw(st.integers(1, 4)),
        n_products=draw(st.integers(n_legs, 6)),
        n_periods=draw(st.integers(1, 10)),
        total_probability=draw(st.floats(0.1, 1.0)),
    )


@st.composite
def single_legs(draw):
    n = draw(st.integers(1, 4))
    t_len = draw(st.integers(1, 25))
    rng = np.random.default_rng(draw(st.integers(0, 10_000)))
    raw = rng.uniform(0.01, 1.0, (t_len, n))
    prob = raw / raw.sum(axis=1, keepdims=True) * draw(st.floats(0.05, 1.0))
    fares = rng.uniform(1.0, 500.0, (t_len, n)) if draw(st.booleans()) else rng.uniform(1, 500, n)
    return prob, fares, draw(st.integers(0, 15))


def every_layer(net, dem):
    dp = solve_network_dp(net, dem, probe=np.arange(net.state_space_size), keep_decisions=False)
    return np.vstack([dp.values[None, :], dp.probe_values])  # (T+1, S)


@given(small_networks())
def test_value_rises_with_capacity_and_falls_with_time(problem):
    net, dem = problem
    v = every_layer(net, dem)
    assert np.all(v[:-1] >= v[1:] - TOL)  # V_t >= V_{t+1}
    states = grid_states(net.capacities)
    strides = grid_strides(net.capacities)
    for i in range(net.n_legs):
        has = states[:, i] >= 1
        s = states[has] @ strides
        assert np.all(v[:, s] >= v[:, s - strides[i]] - TOL)  # V_t(x) >= V_t(x - e_i)


@given(small_networks())
def test_decisions_accept_exactly_when_the_fare_covers_the_opportunity_cost(problem):
    net, dem = problem
    res = get_solver("exact").solve(net, dem)
    bits = res.policy.bits
    x = net.capacities
    s = int(x @ res.policy.strides)
    cost = res["opportunity_cost"]
    for j in range(net.n_products):
        accepted = bool(bits[0, s, j // 8] >> (j % 8) & 1)
        assert accepted == bool(np.isfinite(cost[j]) and net.fares[j] >= cost[j])
    assert np.all(res.bid_prices >= -TOL)


@given(small_networks())
def test_optimum_is_below_the_deterministic_lp_bound(problem):
    net, dem = problem
    exact = get_solver("exact").solve(net, dem).value
    assert exact <= get_solver("dlp").solve(net, dem).value * (1 + 1e-9) + 1e-9


@given(single_legs())
def test_one_leg_seat_values_fall_with_seats_and_with_time(leg):
    """Talluri & van Ryzin (2004), sec. 2.5.1, Prop. 2.21 [number from memory]."""
    prob, fares, cap = leg
    dv = single_leg_dp(prob, fares, cap).seat_values[:, 1:]  # (T+1, C): dV_t(x), x = 1..C
    assert np.all(dv >= -TOL)
    assert np.all(np.diff(dv, axis=1) <= TOL)  # non-increasing in x
    if np.ndim(fares) == 1:  # with fares fixed over time: non-increasing as time runs out
        assert np.all(dv[:-1] >= dv[1:] - TOL)


@given(single_legs())
def test_one_leg_network_dp_is_the_single_leg_dp(leg):
    from rmkit import DemandModel, Network

    prob, fares, cap = leg
    f = np.broadcast_to(fares, prob.shape)[0]
    net = Network.build([("L", cap)], [(f"P{j}", float(f[j]), ["L"]) for j in range(f.size)])
    dem = DemandModel(prob)
    network = every_layer(net, dem)
    single = single_leg_dp(prob, f, cap).values
    np.testing.assert_array_equal(network, single)
