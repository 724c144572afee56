"""``rmkit compare``: the Dataset, value-by-value errors, independent checks, the plot, the CLI.

Independent references: exact values are checked against the plain backward induction of
tests/instances.py (Talluri & van Ryzin 2004, section 3.1, written apart from rmkit's kernels);
the simulated visit shares of the optimal policy against a plain forward recursion of the state
distribution (tests/sim_reference.py: probability mass pushed period by period, no sampling).
"""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest
import xarray as xr

from rmkit import InputError, get_solver
from rmkit.model.network import Network
from rmkit.model.scenario import save_scenario, scenario_from_model
from rmkit.results import SolveResult
from rmkit.workflows.compare import compare
from rmkit.workflows.ranking import ranked
from rmkit.workflows.verification import check_allocation, check_paths
from rmkit.workflows.visits import (
    Visits,
    policy_visits,
    quoted_bid_prices,
    visit_weighted_errors,
)
from tests.conftest import DATA, EXAMPLE
from tests.instances import brute_force_values, random_problem, small_problem

METHODS = ["exact", "dlp", "emsrb-heuristic", "ph"]


@pytest.fixture(scope="module")
def problem():
    return small_problem()


@pytest.fixture(scope="module")
def ds(problem):
    net, dem = problem
    return compare(net, dem, methods=METHODS, paths=300, seed=4, visit_paths=100)


def _row(ds, name):
    return ds.isel(method=ds.method.values.tolist().index(name))


def test_dataset_layout(ds, problem):
    net, dem = problem
    assert ds.method.values.tolist() == METHODS
    assert ds["bid_price"].dims == ("method", "leg")
    assert ds["bid_price_table"].dims == ("method", "period", "capacity", "leg")
    assert ds["revenue"].dims == ("method", "path") and ds.sizes["path"] == 300
    assert json.loads(ds.attrs["methods"]) == METHODS
    params = json.loads(ds.attrs["parameters"])
    assert params["dlp"] == json.loads(json.dumps(get_solver("dlp").get_params(), default=str))
    assert ds.attrs["reference_kind"] == "optimum" and ds.attrs["reference_method"] == "exact"
    assert "rmkit_version" in ds.attrs and ds.attrs["seed"] == 4
    # ph is a bound without a policy: a value with its standard error, no revenue
    ph = _row(ds, "ph")
    assert str(ph["status"].values) == "ran" and np.isfinite(float(ph["value_stderr"]))
    assert np.isnan(float(ph["revenue_mean"]))
    # the optimum agrees with brute force; the upper bounds are above it
    optimum = brute_force_values(net, dem)[0][tuple(int(c) for c in net.capacities)]
    assert float(_row(ds, "exact")["value"]) == pytest.approx(optimum, rel=1e-9)
    assert float(_row(ds, "dlp")["value"]) >= optimum - 1e-7
    assert float(ph["value"]) >= optimum - 3 * float(ph["value_stderr"])
    # every simulated policy was re-checked against capacity; every error is a number
    for name in ("exact", "dlp", "emsrb-heuristic"):
        assert str(_row(ds, name)["check"].values) == "ok"
        for var in ("bid_price_error_mean", "bid_price_error_max",
                    "opportunity_cost_error_mean", "opportunity_cost_error_max"):
            assert np.isfinite(float(_row(ds, name)[var])), (name, var)


def test_round_trip_through_netcdf(ds, tmp_path):
    path = tmp_path / "comparison.nc"
    ds.to_netcdf(path, engine="h5netcdf")
    with xr.open_dataset(path) as back:
        xr.testing.assert_identical(back.load(), ds)


def test_exact_values_at_visits_match_brute_force(ds, problem):
    net, dem = problem
    v = brute_force_values(net, dem)
    period = ds["visit_period"].values
    state = ds["visit_capacity"].values
    exact_bp = ds["exact_bid_price"].values
    exact_oc = ds["exact_opportunity_cost"].values
    a = net.incidence
    for k in range(period.size):
        t, x = int(period[k]), state[k]
        for i in range(net.n_legs):
            if x[i] == 0:
                assert np.isnan(exact_bp[k, i])
                continue
            y = x.copy()
            y[i] -= 1
            want = v[t + 1][tuple(int(c) for c in x)] - v[t + 1][tuple(int(c) for c in y)]
            assert exact_bp[k, i] == pytest.approx(want, abs=1e-9)
        for j in range(net.n_products):
            y = x - a[:, j]
            if y.min() < 0:
                assert np.isnan(exact_oc[k, j])
                continue
            want = v[t + 1][tuple(int(c) for c in x)] - v[t + 1][tuple(int(c) for c in y)]
            assert exact_oc[k, j] == pytest.approx(want, abs=1e-9)
    assert ds["visit_weight"].sum() == pytest.approx(1.0)
    assert int(ds["visit_period"].max()) == dem.n_periods - 1


def test_exact_own_error_is_zero_and_others_are_not(ds):
    exact = _row(ds, "exact")
    for name in ("bid_price_error_mean", "bid_price_error_max", "opportunity_cost_error_mean",
                 "opportunity_cost_error_max"):
        assert float(exact[name]) == 0.0
    # its bid prices at the start equal what the exact solver itself reports there
    net, dem = small_problem()
    own = get_solver("exact").solve(net, dem).bid_prices
    np.testing.assert_allclose(exact["bid_price"].values, own, rtol=1e-12)
    assert float(_row(ds, "dlp")["bid_price_error_mean"]) > 0.0
    assert float(exact["gap_percent"]) == pytest.approx(
        100 * (float(exact["value"]) - float(exact["revenue_mean"])) / float(exact["value"]))


def _visits_from(ds) -> Visits:
    return Visits(period=ds["visit_period"].values, state=ds["visit_capacity"].values,
                  weight=ds["visit_weight"].values)


def test_error_is_zero_when_bid_prices_are_the_exact_marginal_values(ds, problem):
    net, _ = problem
    visits = _visits_from(ds)
    exact_bp = np.where(np.isnan(ds["exact_bid_price"].values), np.inf,
                        ds["exact_bid_price"].values)
    exact_oc = np.where(np.isnan(ds["exact_opportunity_cost"].values), np.inf,
                        ds["exact_opportunity_cost"].values)
    errors = visit_weighted_errors(visits, net.incidence, exact_bp, exact_oc, exact_bp.copy(),
                                   exact_oc.copy())
    assert errors["bid_price_error_mean"] == 0.0 and errors["bid_price_error_max"] == 0.0
    assert errors["opportunity_cost_error_mean"] == 0.0
    # one wrong value moves the mean by its visit share and sets the max
    k = int(np.argmax(visits.weight * (visits.state[:, 0] >= 1)))
    wrong = exact_bp.copy()
    wrong[k, 0] += 7.0
    errors = visit_weighted_errors(visits, net.incidence, exact_bp, exact_oc, wrong, exact_oc)
    mask = visits.state >= 1
    share = visits.weight[k] / float((visits.weight[:, None] * mask).sum())
    assert errors["bid_price_error_max"] == pytest.approx(7.0)
    assert errors["bid_price_error_mean"] == pytest.approx(7.0 * share)


def test_one_leg_table_of_exact_seat_values_has_zero_error():
    """On one leg the exact marginal values form a (period, capacity) table: quoting it as a
    method's bid_price_table through the compare pipeline must give zero error."""
    net = Network.build([("L", 4)], [("hi", 200.0, ["L"]), ("lo", 80.0, ["L"])])
    from rmkit import DemandModel

    p = np.column_stack([np.linspace(0.05, 0.35, 10), np.linspace(0.5, 0.1, 10)])
    dem = DemandModel(p)
    v = brute_force_values(net, dem)
    table = np.full((10, 5, 1), np.inf)
    for t in range(10):
        for x in range(1, 5):
            table[t, x, 0] = v[t + 1][(x,)] - v[t + 1][(x - 1,)]
    exact = get_solver("exact").solve(net, dem)
    visits = policy_visits(net, dem, exact, dem.sample_arrivals(200, 3))
    fake = SolveResult(method="exact-table", network=net, n_periods=10,
                       variables={"value": np.float64(0.0), "bid_price_table": table})
    leg, cost = get_solver("exact").marginal_values(net, dem, visits.period, visits.state)
    errors = visit_weighted_errors(visits, net.incidence, leg, cost,
                                   quoted_bid_prices(fake, visits))
    assert errors["bid_price_error_max"] == pytest.approx(0.0, abs=1e-9)
    assert errors["opportunity_cost_error_max"] == pytest.approx(0.0, abs=1e-9)
    shifted = fake.variables["bid_price_table"].copy()
    shifted[:-1] = shifted[1:]  # off by one period: must be caught
    late = SolveResult(method="late", network=net, n_periods=10,
                       variables={"value": np.float64(0.0), "bid_price_table": shifted})
    errors = visit_weighted_errors(visits, net.incidence, leg, cost,
                                   quoted_bid_prices(late, visits))
    assert errors["bid_price_error_max"] > 1.0


def test_visit_shares_agree_with_the_exact_forward_recursion():
    from tests.sim_reference import grid_strides, state_distribution

    net, dem = random_problem(11, n_legs=2, max_capacity=3, n_products=4, n_periods=8)
    exact = get_solver("exact").solve(net, dem)
    n = 4000
    visits = policy_visits(net, dem, exact, dem.sample_arrivals(n, 5))
    exact_p = state_distribution(net, dem, exact)
    empirical = np.zeros_like(exact_p)
    s = visits.state @ grid_strides(net)
    np.add.at(empirical, (visits.period, s), visits.weight * dem.n_periods)
    sd = np.sqrt(exact_p * (1 - exact_p) / n)
    assert np.all(np.abs(empirical - exact_p) <= 4.5 * sd + 2e-3)
    np.testing.assert_allclose(empirical.sum(axis=1), 1.0)


def test_unknown_method_lists_valid_ones(problem):
    net, dem = problem
    with pytest.raises(InputError, match="valid methods: .*dlp"):
        compare(net, dem, methods=["dlp", "no-such-method"], paths=10)
    with pytest.raises(InputError, match="paths"):
        compare(net, dem, methods=["dlp"], paths=0)


def test_method_that_cannot_run_is_skipped_with_the_reason():
    from rmkit.model.scenario import load_scenario

    sc = load_scenario(DATA / "rm_200_4_1.0_4.0.txt.gz")
    ds = compare(sc.network, sc.demand, methods=["exact", "dlp"], paths=30, seed=1)
    exact = _row(ds, "exact")
    assert str(exact["status"].values) == "skipped"
    assert str(exact["reason"].values) == get_solver("exact").accepts(sc.network, sc.demand)
    assert np.isnan(float(exact["revenue_mean"]))
    assert ds.attrs["reference_kind"] == "best bound" and ds.attrs["reference_method"] == "dlp"
    # Topaloglu (2009), Table 1: DLP bound 21531 on this instance (published, rounded)
    assert ds.attrs["reference_value"] == pytest.approx(21531, abs=1)
    rows = ranked(ds)
    assert rows[0]["method"] == "dlp" and rows[-1]["status"] == "skipped"
    assert "visit_weight" not in ds and math.isnan(float(_row(ds, "dlp")["bid_price_error_mean"]))


def test_independent_checks_catch_violations(ds, problem):
    net, _ = problem
    sim = xr.Dataset({
        "accepted": (("path", "product"), np.zeros((2, net.n_products), dtype=np.int64)),
        "seats_left": (("path", "leg"), np.tile(net.capacities, (2, 1))),
        "revenue": (("path",), np.zeros(2)),
    })
    assert check_paths(net, sim) == "ok"
    sim["accepted"][1, 0] = int(net.capacities.max()) + 1
    assert "sold" in check_paths(net, sim)
    res = get_solver("dlp").solve(*problem)
    assert check_allocation(net, res) == "ok"
    over = SolveResult(method="bad", network=net, n_periods=res.n_periods,
                       variables={"allocation": net.capacities.max() + np.ones(net.n_products)})
    assert "seats of leg" in check_allocation(net, over)


def test_plot_is_a_png_of_sensible_size(ds, tmp_path):
    import matplotlib.image as mpimg

    from rmkit.workflows.plots import comparison_figure

    path = tmp_path / "comparison.png"
    comparison_figure(ds, path)
    raw = path.read_bytes()
    assert raw[:8] == b"\x89PNG\r\n\x1a\n"
    assert 30_000 < len(raw) < 5_000_000
    image = mpimg.imread(path)
    assert image.shape[0] >= 800 and image.shape[1] >= 800
    assert image[..., :3].std() > 0.05  # not a blank canvas
    with pytest.raises(InputError, match="known legs"):
        comparison_figure(ds, None, leg="nowhere")


def _rmkit(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "rmkit", *args], capture_output=True,
                          text=True, cwd=cwd, timeout=600)


def test_cli_json_netcdf_and_plot(tmp_path):
    net, dem = small_problem()
    scenario = tmp_path / "small.toml"
    save_scenario(scenario_from_model(net, dem, "small"), scenario)
    out, plot = tmp_path / "c.nc", tmp_path / "c.png"
    done = _rmkit("compare", str(scenario), "--methods", "dlp,exact,emsrb-heuristic", "--paths",
                  "100", "--out", str(out), "--plot", str(plot), "--json")
    assert done.returncode == 0, done.stderr
    data = json.loads(done.stdout)
    assert {"scenario", "seed", "paths", "resolve", "reference", "best_policy", "methods", "out",
            "plot"} <= set(data)
    assert data["reference"]["kind"] == "optimum"
    assert [m["method"] for m in data["methods"]][0] in ("exact", "dlp", "emsrb-heuristic")
    with xr.open_dataset(out) as back:
        assert back.method.values.tolist() == ["dlp", "exact", "emsrb-heuristic"]
    assert plot.read_bytes()[:4] == b"\x89PNG"
    table = _rmkit("compare", str(scenario), "--methods", "dlp,exact", "--paths", "50",
                   "--param", "dlp.dual=\"min\"")
    assert table.returncode == 0 and "gap to optimum" in table.stdout


def test_cli_bad_input(tmp_path):
    bad = _rmkit("compare", str(EXAMPLE), "--methods", "dlp,nope")
    assert bad.returncode == 2 and "valid methods" in bad.stderr and "Traceback" not in bad.stderr
    bad = _rmkit("compare", str(EXAMPLE), "--methods", "dlp", "--out", str(tmp_path / "x.txt"))
    assert bad.returncode == 2 and "--out" in bad.stderr
    bad = _rmkit("compare", str(EXAMPLE), "--methods", "dlp", "--param", "dlp.colour=1")
    assert bad.returncode == 2 and "valid parameters" in bad.stderr
    bad = _rmkit("compare", str(EXAMPLE), "--methods", "dlp", "--param", "lr.tol=0.1")
    assert bad.returncode == 2 and "which is not run here" in bad.stderr


def test_demo_writes_its_outputs(tmp_path):
    done = _rmkit("demo", "--methods", "exact,dlp,emsrb-heuristic", "--paths", "100",
                  "--out-dir", str(tmp_path / "out"))
    assert done.returncode == 0, done.stderr
    assert (tmp_path / "out" / "comparison.nc").exists()
    assert (tmp_path / "out" / "comparison.png").read_bytes()[:4] == b"\x89PNG"
    assert str(tmp_path / "out") in done.stdout


def test_exact_is_the_yardstick_even_when_not_listed(problem):
    net, dem = problem
    ds = compare(net, dem, methods=["dlp"], paths=50, seed=1, visit_paths=20)
    assert ds.method.values.tolist() == ["dlp"]
    assert ds.attrs["reference_kind"] == "optimum"
    optimum = brute_force_values(net, dem)[0][tuple(int(c) for c in net.capacities)]
    assert ds.attrs["reference_value"] == pytest.approx(optimum, rel=1e-9)
    assert float(_row(ds, "dlp")["bid_price_error_mean"]) > 0
    table = ds["exact_bid_price_table"].values
    assert np.isinf(table[:, 0, :]).all() and np.isfinite(table[:, 1:, :]).any()
    alone = compare(net, dem, methods=["dlp"], paths=50, seed=1, with_exact=False)
    assert alone.attrs["reference_kind"] == "best bound" and "visit_weight" not in alone
