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
from rmkit.errors import InputError
from rmkit.methods.shared.network_lp import NetworkLP
from rmkit.model.scenario import load_scenario
from tests.conftest import instance_path, shared_names
from tests.instances import brute_force_values, random_problem, small_problem
from tests.published import DLP_BOUND

PUBLISHED_200 = sorted(DLP_BOUND)


# ----------------------------------------------------------------------------- published bound
def _check_published_dlp(name: str) -> None:
    scen = load_scenario(instance_path(name))
    res = get_solver("dlp").solve(scen.network, scen.demand)
    assert res.status == "optimal"
    # Topaloglu (2009), Table 1: published DLP bound, rounded to whole currency units.
    assert abs(res.value - DLP_BOUND[name]) <= 1.0, (name, res.value, DLP_BOUND[name])


@pytest.mark.parametrize("name", PUBLISHED_200)
def test_dlp_matches_published_bound(name):
    _check_published_dlp(name)


def test_every_published_200_period_instance_is_covered():
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
    scen = load_scenario(instance_path("rm_200_4_1.6_8.0"))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = get_solver("dlp", time_limit=1e-9).solve(scen.network, scen.demand)
    assert res.status == "iteration_limit"
    assert np.all(np.isnan(res.bid_prices)) and np.isnan(res.value)
    assert any("time_limit" in str(w.message) for w in caught)


def test_back_end_failure_raises_solver_error_with_advice(monkeypatch):
    import rmkit.methods.shared.network_lp as lpm

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


# ----------------------------------------------------------------------------- orderings
ORDERING_SEEDS = range(6)


def _small_random(seed: int):
    return random_problem(300 + seed, n_legs=3, max_capacity=3, n_products=6, n_periods=10)


@pytest.mark.parametrize("seed", ORDERING_SEEDS)
def test_exact_le_perfect_hindsight_le_dlp(seed):
    """Exact optimum <= E[perfect hindsight] <= DLP (Talluri & van Ryzin 1999; 2004, sec. 3.3)."""
    net, dem = _small_random(seed)
    exact = brute_force_values(net, dem)[0][tuple(int(c) for c in net.capacities)]
    ph = get_solver("ph", samples=2000).solve(net, dem, seed=seed)
    dlp = get_solver("dlp").solve(net, dem)
    assert ph.stderr > 0
    assert exact <= ph.value + 3 * ph.stderr
    assert ph.value <= dlp.value + 3 * ph.stderr
    assert exact <= dlp.value + 1e-9


@pytest.mark.parametrize("seed", ORDERING_SEEDS)
@pytest.mark.parametrize("law", ["poisson", "normal"])
def test_pnlp_objective_le_dlp(seed, law):
    net, dem = _small_random(seed)
    for t in (0, 5):
        state = BookingState(t, tuple(int(c) for c in net.capacities))
        pnlp = get_solver("pnlp", law=law).solve(net, dem, state=state)
        dlp = get_solver("dlp").solve(net, dem, state=state)
        assert pnlp.status == "optimal"
        assert pnlp.value <= dlp.value + 1e-9  # Jensen: E[min(D, y)] <= min(E[D], y)


@pytest.mark.parametrize("method", ["dlp", "rlp", "pnlp"])
def test_bid_prices_non_negative_on_random_states(method):
    for net, dem, t, x in _random_states(3, 12):
        res = get_solver(method).solve(net, dem, state=BookingState(t, tuple(int(v) for v in x)),
                                       seed=t)
        assert res.status == "optimal"
        assert np.all(np.isfinite(res.bid_prices)) and np.all(res.bid_prices >= 0.0)


@pytest.mark.parametrize("method", ["rlp", "pnlp"])
def test_slack_leg_has_zero_bid_price_for_every_method(method):
    """Leg B (50 seats) can never fill: at most 20 requests for the two products using it."""
    net = Network.build(
        [("A", 3), ("B", 50)],
        [("A1", 120.0, ["A"]), ("B1", 80.0, ["B"]), ("AB", 150.0, ["A", "B"])],
    )
    dem = DemandModel(np.full((20, 3), 0.3))
    res = get_solver(method).solve(net, dem, seed=0)
    assert res.bid_prices[1] == 0.0
    assert res.bid_prices[0] > 0.0


# ----------------------------------------------------------------------------- PNLP references
def _expected_sales(law: str, mean: float, var: float, y: int) -> float:
    """E[min(D, y)] straight from scipy's distributions (a reference apart from pnlp's code)."""
    from scipy import integrate
    from scipy.stats import norm, poisson

    if law == "poisson":
        k = np.arange(0, y + int(mean + 20 * np.sqrt(mean + 1)) + 50)
        return float(np.sum(np.minimum(k, y) * poisson.pmf(k, mean)))
    s = np.sqrt(var)
    below, _ = integrate.quad(lambda v: v * norm.pdf(v, mean, s), -np.inf, y)
    return float(below + y * norm.sf(y, mean, s))


@pytest.mark.parametrize("law", ["poisson", "normal"])
@pytest.mark.parametrize("seed", range(4))
def test_pnlp_equals_brute_force_over_whole_allocations(law, seed):
    """On two-leg networks the incidence matrix is an interval matrix, hence totally unimodular,
    so the piecewise-linear program has a whole-number optimum; it must equal the best whole
    allocation found by enumeration with E[min(D, y)] from scipy.stats."""
    import itertools

    net, dem = random_problem(600 + seed, n_legs=2, max_capacity=4, n_products=4, n_periods=12)
    p = dem.probabilities
    mean, var = p.sum(axis=0), (p * (1 - p)).sum(axis=0)
    res = get_solver("pnlp", law=law).solve(net, dem)
    y = res["allocation"]
    np.testing.assert_allclose(y, np.round(y), atol=1e-7)
    table = [
        [_expected_sales(law, mean[j], var[j], k) for k in range(net.max_capacity + 1)]
        for j in range(net.n_products)
    ]
    best = -np.inf
    for alloc in itertools.product(range(net.max_capacity + 1), repeat=net.n_products):
        if np.all(net.incidence @ np.array(alloc) <= net.capacities):
            best = max(best, sum(net.fares[j] * table[j][k] for j, k in enumerate(alloc)))
    assert res.value == pytest.approx(best, rel=1e-7, abs=1e-6)


@pytest.mark.parametrize("seed", range(4))
def test_pnlp_poisson_whole_allocation_is_below_the_optimum(seed):
    """At a whole allocation the Poisson PNLP objective is the partitioned-allocation revenue
    under the Poisson law, below that policy's revenue under the model's Bernoulli law (convex
    order; our derivation), hence below the exact optimum (brute force)."""
    net, dem = random_problem(700 + seed, n_legs=2, max_capacity=3, n_products=4, n_periods=10)
    exact = brute_force_values(net, dem)[0][tuple(int(c) for c in net.capacities)]
    res = get_solver("pnlp").solve(net, dem)
    np.testing.assert_allclose(res["allocation"], np.round(res["allocation"]), atol=1e-7)
    assert res.value <= exact + 1e-9


# ----------------------------------------------------------------------------- RLP and PH
def test_ph_and_rlp_values_are_means_of_scipy_hindsight_lps():
    net, dem = small_problem()
    t, x = 3, np.array([2, 1, 3])
    state = BookingState(t, tuple(int(v) for v in x))
    draws = dem.sample_demand_to_come(40, 11, t)
    ref = np.array([-_scipy_dlp(net, x.astype(float), d.astype(float)).fun for d in draws])
    for method in ("ph", "rlp"):
        res = get_solver(method, samples=40).solve(net, dem, state=state, seed=11)
        assert res.value == pytest.approx(ref.mean(), rel=1e-9)
        assert res.stderr == pytest.approx(ref.std(ddof=1) / np.sqrt(40), rel=1e-9)


def test_rlp_bid_prices_are_averaged_sample_duals():
    net, dem = small_problem()
    res = get_solver("rlp", samples=30, dual="min").solve(net, dem, seed=4)
    draws = dem.sample_demand_to_come(30, 4, 0).astype(float)
    model = NetworkLP(net, dual="min")
    mean = np.mean([model.solve(net.capacities, d).bid_price for d in draws], axis=0)
    np.testing.assert_allclose(res.bid_prices, mean, atol=1e-9)
    assert "dual='min'" in res.to_dataset().attrs["message"]


@pytest.mark.parametrize("method", ["ph", "rlp"])
def test_stderr_shrinks_like_one_over_sqrt_samples_and_seeds_agree(method):
    scen = load_scenario(instance_path("rm_200_4_1.2_4.0"))
    net, dem = scen.network, scen.demand
    small = get_solver(method, samples=100).solve(net, dem, seed=1)
    large = get_solver(method, samples=1600).solve(net, dem, seed=1)
    other = get_solver(method, samples=1600).solve(net, dem, seed=2)
    # 16x the samples: the standard error falls by about 4 (sample std. devs. differ a little)
    assert 3.0 <= small.stderr / large.stderr <= 5.3
    gap = abs(large.value - other.value)
    assert gap <= 3.0 * np.hypot(large.stderr, other.stderr)
    # Topaloglu (2009), Table 1: PH lies below the published DLP bound of this instance
    assert large.value <= DLP_BOUND["rm_200_4_1.2_4.0"] + 3 * large.stderr


@pytest.mark.parametrize("method", ["ph", "rlp", "pnlp"])
def test_time_limit_reported_for_every_method(method):
    scen = load_scenario(instance_path("rm_200_4_1.6_8.0"))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = get_solver(method, time_limit=1e-9).solve(scen.network, scen.demand, seed=0)
    assert res.status == "iteration_limit"
    assert np.isnan(res.value)
    assert "time_limit" in res.to_dataset().attrs["message"]
    assert any("time_limit" in str(w.message) for w in caught)


@pytest.mark.parametrize("method", ["ph", "rlp", "pnlp"])
def test_solver_failure_raises_with_advice(method, monkeypatch):
    import rmkit.methods.pnlp as pnlp
    import rmkit.methods.shared.network_lp as lpm

    monkeypatch.setattr(lpm, "map_status", lambda status: "error")
    monkeypatch.setattr(pnlp, "map_status", lambda status: "error")
    net, dem = small_problem()
    with pytest.raises(SolverError, match="check that capacities"):
        get_solver(method).solve(net, dem, seed=0)


def test_bad_samples_are_refused_with_the_template():
    net, dem = small_problem()
    for method in ("ph", "rlp"):
        with pytest.raises(InputError, match="'samples' parameter of .* must be an integer >= 2"):
            get_solver(method, samples=1).solve(net, dem)
    with pytest.raises(InputError, match="'law'"):
        get_solver("pnlp", law="gamma").solve(net, dem)


def test_huge_requests_are_refused_up_front_with_the_estimate(monkeypatch):
    from rmkit.errors import ProblemTooLargeError
    from rmkit.methods import pnlp

    net, dem = small_problem()
    with pytest.raises(ProblemTooLargeError, match=r"GiB .* use fewer samples"):
        get_solver("ph", samples=10**9).solve(net, dem)
    with monkeypatch.context() as patch:
        patch.setattr(pnlp, "MAX_UNITS", 5)  # small_problem needs more unit columns than 5
        with pytest.raises(ProblemTooLargeError, match="unit columns"):
            get_solver("pnlp").solve(net, dem)
    big = Network.build([("L", 10**7)], [(f"P{j}", 100.0 + j, ["L"]) for j in range(3)])
    light = DemandModel(np.full((1, 3), 0.3))
    # ten million seats but little demand: only the useful units are listed, so it solves
    res = get_solver("pnlp").solve(big, light)
    assert res.status == "optimal" and res.bid_prices[0] == 0.0


def test_a_solution_failing_its_recheck_is_downgraded_with_a_warning(monkeypatch):
    """scipy-style re-check: an 'optimal' answer that breaks a constraint is not passed on as
    optimal (simulated by a re-check that reports a violation of 0.5 seats)."""
    monkeypatch.setattr(NetworkLP, "_violations", lambda self, xs, ds, ys: np.full(len(ys), 0.5))
    net, dem = small_problem()
    with pytest.warns(RuntimeWarning, match="violates a constraint by 0.5"):
        res = get_solver("dlp").solve(net, dem)
    assert res.status == "optimal_inaccurate"
    batch = NetworkLP(net).solve_many(net.capacities, dem.sample_demand_to_come(3, 0))
    assert batch.statuses == ("optimal_inaccurate",) * 3


def test_batch_failure_wins_over_an_earlier_inaccurate_solve():
    from rmkit.methods.rlp import batch_failure
    from rmkit.methods.shared.network_lp import LPBatch

    nan = np.full((3, 1), np.nan)
    batch = LPBatch(
        np.zeros(3), nan, nan, ("optimal_inaccurate", "optimal", "iteration_limit"),
        ("off by 1e-3", "", "stopped at time_limit"), "highs", np.zeros(3, dtype=np.int64),
    )
    assert batch.first_problem() == (2, "iteration_limit", "stopped at time_limit")
    with pytest.warns(RuntimeWarning, match="sample 2"):
        assert batch_failure("rlp", batch) == "iteration_limit"


def test_pnlp_poisson_tails_in_one_call_equal_a_call_per_product(monkeypatch):
    """pnlp computes every product's P(D >= u) in one vectorised call; the numbers must be
    those of one call per product (the fallback above GRID_CELLS), bit for bit."""
    from rmkit.methods import pnlp

    rng = np.random.default_rng(1)
    mean = np.r_[0.0, rng.uniform(0, 80, 50), 1e-9, 300.0]
    units = np.full(mean.size, 10**6)
    grid = pnlp.unit_increments("poisson", mean, mean, units)
    monkeypatch.setattr(pnlp, "GRID_CELLS", 0)
    each = pnlp.unit_increments("poisson", mean, mean, units)
    assert all(np.array_equal(a, b) for a, b in zip(grid[0], each[0], strict=True))
    np.testing.assert_array_equal(grid[1], each[1])
