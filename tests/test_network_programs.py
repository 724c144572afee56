"""Network programs (DLP, RLP, PNLP, perfect hindsight) against published values and references.

External references used here:
* Topaloglu (2009), Operations Research 57(3):637-649, Table 1: the DLP bound of every 200-period
  hub-and-spoke instance (tests/published.py).
* scipy.optimize.linprog(method="highs"): an independent LP solve of the same program.
* Brute-force backward induction (tests/instances.brute_force_values): the exact optimum.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.optimize import linprog

from rmkit import BookingState, DemandModel, Network, SolverError, get_solver
from rmkit.benchmark_io import read_hub_spoke
from rmkit.errors import InputError
from rmkit.lp_model import NetworkLP
from tests.conftest import HUB_SPOKE, instance_path, shared_names, vendored
from tests.instances import brute_force_values, random_problem, small_problem
from tests.published import DLP_BOUND

VENDORED_200 = sorted(n for n in DLP_BOUND if vendored(n).exists())
SHARED_200 = sorted(n for n in DLP_BOUND if not vendored(n).exists())


# ----------------------------------------------------------------------------- published bound
def _check_published_dlp(name: str) -> None:
    scen = read_hub_spoke(instance_path(name))
    res = get_solver("dlp").solve(scen.network, scen.demand)
    assert res.status == "optimal"
    # Topaloglu (2009), Table 1: published DLP bound, rounded to whole currency units.
    assert abs(res.value - DLP_BOUND[name]) <= 1.0, (name, res.value, DLP_BOUND[name])


@pytest.mark.parametrize("name", VENDORED_200)
def test_dlp_matches_published_bound_vendored(name):
    _check_published_dlp(name)


@pytest.mark.parametrize("name", SHARED_200)
def test_dlp_matches_published_bound_shared(name):
    _check_published_dlp(name)  # instance_path skips when ../shared is absent


def test_every_published_200_period_instance_is_covered():
    assert len(VENDORED_200) == 6
    if HUB_SPOKE.exists():
        assert set(shared_names(200)) == set(DLP_BOUND)


# ----------------------------------------------------------------------------- scipy reference
def _scipy_dlp(net: Network, x: np.ndarray, d: np.ndarray):
    res = linprog(
        -net.fares,
        A_ub=net.incidence,
        b_ub=x,
        bounds=list(zip(np.zeros(net.n_products), d, strict=True)),
        method="highs",
    )
    assert res.status == 0
    return res


def _primal_non_degenerate(net: Network, res, x: np.ndarray, d: np.ndarray) -> bool:
    """A basic solution with exactly m variables strictly inside their bounds (counting leg
    slacks) is primal non-degenerate, so its dual is unique."""
    tol = 1e-7
    y = res.x
    interior = int(np.sum((y > tol) & (y < d - tol)))
    slack = x - net.incidence @ y
    return interior + int(np.sum(slack > tol)) == net.n_legs


def _random_states(seed: int, count: int):
    rng = np.random.default_rng(seed)
    for k in range(count):
        net, dem = random_problem(
            1000 * seed + k, n_legs=int(rng.integers(2, 5)), max_capacity=8,
            n_products=int(rng.integers(4, 10)), n_periods=int(rng.integers(5, 30)),
        )
        t = int(rng.integers(0, dem.n_periods))
        x = rng.integers(0, net.capacities + 1)
        yield net, dem, t, x


def test_dlp_value_and_duals_match_scipy_linprog():
    compared = 0
    for net, dem, t, x in _random_states(1, 60):
        d = dem.demand_to_come(t)
        res = get_solver("dlp").solve(net, dem, state=BookingState(t, tuple(int(v) for v in x)))
        ref = _scipy_dlp(net, x.astype(float), d)
        assert res.value == pytest.approx(-ref.fun, rel=1e-9, abs=1e-9)
        if _primal_non_degenerate(net, ref, x, d):
            np.testing.assert_allclose(res.bid_prices, -ref.ineqlin.marginals, atol=1e-7)
            compared += 1
    assert compared >= 20, "too few non-degenerate cases to compare duals"


def test_warm_batch_equals_one_by_one_cold_solves():
    net, dem = random_problem(5, n_legs=4, max_capacity=10, n_products=9, n_periods=40)
    rng = np.random.default_rng(0)
    xs = rng.integers(0, net.capacities + 1, size=(30, net.n_legs))
    ds = dem.sample_demand_to_come(30, seed=2).astype(float)
    batch = NetworkLP(net).solve_many(xs, ds)
    assert batch.ok and batch.dual == "highs"
    for k in range(30):
        ref = _scipy_dlp(net, xs[k].astype(float), ds[k])
        assert batch.values[k] == pytest.approx(-ref.fun, rel=1e-9, abs=1e-9)
        cold = NetworkLP(net).solve(xs[k], ds[k])
        assert cold.value == pytest.approx(batch.values[k], rel=1e-12, abs=1e-9)


# ----------------------------------------------------------------------------- degenerate duals
def _degenerate():
    """One leg of 2 seats, demand exactly 2 for one fare-100 product: any leg dual in [0, 100]
    is optimal (worked out by hand), so the dual choice matters."""
    net = Network.build([("L", 2)], [("P", 100.0, ["L"])])
    return net, DemandModel(np.array([[1.0], [1.0]]))


@pytest.mark.parametrize(("dual", "expected"), [("min", 0.0), ("max", 100.0)])
def test_dual_choice_on_a_degenerate_lp(dual, expected):
    net, dem = _degenerate()
    res = get_solver("dlp", dual=dual).solve(net, dem)
    assert res.value == pytest.approx(200.0)
    assert res.bid_prices[0] == pytest.approx(expected, abs=1e-9)
    assert f"dual='{dual}'" in res.to_dataset().attrs["message"]
    assert res.payload["dual"] == dual


def test_dual_choices_bracket_every_optimal_dual():
    for net, dem, t, x in _random_states(2, 25):
        model = NetworkLP(net)
        d = dem.demand_to_come(t)
        lo, hs, hi = (model.solve(x, d, dual=c) for c in ("min", "highs", "max"))
        assert lo.value == pytest.approx(hs.value) and hi.value == pytest.approx(hs.value)
        # each is an optimal dual: dual feasible and dual objective equals the primal value
        for sol in (lo, hi, hs):
            assert sol.dual in ("min", "max", "highs")
            sigma = np.maximum(net.fares - net.incidence.T @ sol.bid_price, 0.0)
            assert x @ sol.bid_price + d @ sigma == pytest.approx(sol.value, rel=1e-7, abs=1e-6)
        assert lo.bid_price.sum() <= hs.bid_price.sum() + 1e-7
        assert hs.bid_price.sum() <= hi.bid_price.sum() + 1e-7


# ----------------------------------------------------------------------------- failure reporting
def test_negative_capacity_is_reported_infeasible_not_zero():
    net, dem = small_problem()
    sol = NetworkLP(net).solve(np.r_[-1, net.capacities[1:]], dem.demand_to_come(0))
    assert sol.status == "infeasible" and not sol.ok
    assert "check" in sol.message and ">= 0" in sol.message
    assert np.isnan(sol.value) and np.all(np.isnan(sol.bid_price))


def test_batch_reports_the_first_failing_solve():
    net, dem = small_problem()
    d = dem.sample_demand_to_come(3, seed=0).astype(float)
    d[1, 0] = -1.0
    batch = NetworkLP(net).solve_many(net.capacities, d)
    assert batch.statuses == ("optimal", "infeasible", "optimal")
    k, status, message = batch.first_problem()
    assert (k, status) == (1, "infeasible") and "demand bound" in message
    assert np.isnan(batch.values[1]) and np.isfinite(batch.values[[0, 2]]).all()


def test_non_finite_input_is_refused():
    net, dem = small_problem()
    with pytest.raises(InputError, match="demand_bound"):
        NetworkLP(net).solve(net.capacities, np.full(net.n_products, np.inf))
    with pytest.raises(InputError, match="capacity"):
        NetworkLP(net).solve(net.capacities[:-1], dem.demand_to_come(0))
    with pytest.raises(InputError, match="'dual'"):
        get_solver("dlp", dual="median").solve(net, dem)


def test_time_limit_gives_a_status_and_a_warning_not_zeros():
    scen = read_hub_spoke(instance_path("rm_200_4_1.6_8.0"))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = get_solver("dlp", time_limit=1e-9).solve(scen.network, scen.demand)
    assert res.status == "iteration_limit"
    assert np.all(np.isnan(res.bid_prices)) and np.isnan(res.value)
    assert any("time_limit" in str(w.message) for w in caught)


def test_back_end_failure_raises_solver_error_with_advice(monkeypatch):
    import rmkit.lp_model as lpm

    monkeypatch.setattr(lpm, "map_status", lambda status: "error")
    net, dem = small_problem()
    with pytest.raises(SolverError, match="check that capacities"):
        get_solver("dlp").solve(net, dem)


# ----------------------------------------------------------------------------- DLP facts
def test_slack_leg_has_zero_bid_price():
    net = Network.build(
        [("A", 3), ("B", 50)],
        [("A1", 120.0, ["A"]), ("B1", 80.0, ["B"]), ("AB", 150.0, ["A", "B"])],
    )
    dem = DemandModel(np.full((20, 3), 0.3))  # 6 requests each expected; leg B has room
    for dual in ("highs", "min", "max"):
        res = get_solver("dlp", dual=dual).solve(net, dem)
        slack = net.capacities - net.incidence @ res["allocation"]
        assert slack[1] > 1 and res.bid_prices[1] == 0.0
        assert res.bid_prices[0] == pytest.approx(150.0)  # AB displaces A1: by hand


def test_dlp_bounds_exact_optimum_from_every_state():
    net, dem = small_problem()
    exact = brute_force_values(net, dem)
    model = NetworkLP(net)
    for t in (0, 4, 9):
        for x, v in exact[t].items():
            assert model.solve(np.array(x), dem.demand_to_come(t)).value >= v - 1e-9
