"""Invariants of the network LP and the programs built on it, on hypothesis-drawn small networks.

Each property is a standard LP fact (strong duality, monotonicity of the optimal value in its
right-hand side; e.g. Talluri & van Ryzin 2004, sec. 3.3.1) or the Jensen ordering of PNLP below
DLP; the values are cross-checked against scipy.optimize.linprog (HiGHS) where one is needed.
"""

from __future__ import annotations

import numpy as np
from hypothesis import given
from hypothesis import strategies as st
from scipy.optimize import linprog

from rmkit import BookingState, get_solver
from rmkit.methods.shared.network_lp import NetworkLP
from tests.instances import random_problem

problems = st.builds(
    random_problem,
    seed=st.integers(0, 10_000),
    n_legs=st.integers(1, 4),
    max_capacity=st.integers(1, 6),
    n_products=st.integers(1, 8),
    n_periods=st.integers(1, 20),
)


def _state(data, net, dem):
    t = data.draw(st.integers(0, dem.n_periods - 1), label="period")
    x = np.array(
        [data.draw(st.integers(0, int(c)), label=f"seats{i}") for i, c in enumerate(net.capacities)]
    )
    return t, x


@given(problem=problems, data=st.data(), dual=st.sampled_from(["highs", "min", "max"]))
def test_strong_duality_and_dual_feasibility(problem, data, dual):
    net, dem = problem
    t, x = _state(data, net, dem)
    d = dem.demand_to_come(t)
    sol = NetworkLP(net, dual=dual).solve(x, d)
    ref = linprog(-net.fares, A_ub=net.incidence, b_ub=x,
                  bounds=list(zip(np.zeros(d.size), d, strict=True)), method="highs")
    assert sol.status == "optimal" and sol.dual == dual
    assert np.isclose(sol.value, -ref.fun, rtol=1e-9, atol=1e-9)
    pi = sol.bid_price
    assert np.all(pi >= 0)
    sigma = np.maximum(net.fares - net.incidence.T @ pi, 0.0)  # cheapest feasible sigma
    assert np.isclose(x @ pi + d @ sigma, sol.value, rtol=1e-7, atol=1e-6)


@given(problem=problems, data=st.data())
def test_dlp_value_rises_with_capacity_and_falls_with_time(problem, data):
    net, dem = problem
    t, x = _state(data, net, dem)
    model = NetworkLP(net)
    z = model.solve(x, dem.demand_to_come(t)).value
    more = np.minimum(x + 1, net.capacities)
    assert model.solve(more, dem.demand_to_come(t)).value >= z - 1e-9
    assert model.solve(x, dem.demand_to_come(dem.n_periods - 1)).value <= z + 1e-9


@given(problem=problems, data=st.data())
def test_warm_batch_equals_cold_solves(problem, data):
    net, dem = problem
    k = data.draw(st.integers(2, 6), label="samples")
    xs = np.array([_state(data, net, dem)[1] for _ in range(k)])
    ds = dem.sample_demand_to_come(k, data.draw(st.integers(0, 99), label="seed")).astype(float)
    batch = NetworkLP(net).solve_many(xs, ds)
    cold = [NetworkLP(net).solve(xs[s], ds[s]).value for s in range(k)]
    np.testing.assert_allclose(batch.values, cold, rtol=1e-9, atol=1e-9)


@given(problem=problems, data=st.data(), law=st.sampled_from(["poisson", "normal"]))
def test_pnlp_below_dlp(problem, data, law):
    net, dem = problem
    t, x = _state(data, net, dem)
    state = BookingState(t, tuple(int(v) for v in x))
    pnlp = get_solver("pnlp", law=law).solve(net, dem, state=state)
    dlp = get_solver("dlp").solve(net, dem, state=state)
    assert pnlp.status == "optimal"
    assert pnlp.value <= dlp.value + 1e-7
    assert np.all(net.incidence @ pnlp["allocation"] <= x + 1e-7)
    assert np.all(pnlp.bid_prices >= 0)
