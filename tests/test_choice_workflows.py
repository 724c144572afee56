"""Choice scenarios through the workflows a scientist runs: ``generate``, ``compare``,
``calibrate`` and ``sweep`` by method name, with the independent-demand view labelled.

Checks (internal consistency, issue 13): CDLP >= exact >= every simulated policy's mean minus 3
standard errors; the exact policy's simulated mean matches the DP value within 3 standard errors;
where the exact DP does not fit, gaps are measured against the best bound (CDLP). Sizes are small
(a generated 2-spoke network over 60 periods: 12 products, 12 segments, a 2-second exact DP).
"""

from __future__ import annotations

import csv
import json
import subprocess
import sys
from functools import cache

import numpy as np
import pytest

from rmkit.methods.base import ASSUMES_INDEPENDENT, assumption_of, get_solver
from rmkit.model.families import generate
from rmkit.model.scenario import load_scenario
from rmkit.workflows.calibrate import calibrate, calibration_report
from rmkit.workflows.compare import compare
from rmkit.workflows.ranking import ranked
from tests.conftest import ROOT

SMALL = {"spokes": 2, "alpha": 1.2, "periods": 60, "seed": 1}
VIEWS = ("dlp:independent", "emsrb:independent")


@cache
def small():
    return generate("hub-spoke-choice", **SMALL)


def _cli(*args: str, cwd=ROOT) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "rmkit", *args], capture_output=True, text=True,
                          cwd=cwd, timeout=300)


# ---------------------------------------------------------------- generate
def test_generate_hub_spoke_choice_from_the_command_line(tmp_path):
    helped = _cli("generate", "--help")
    assert helped.returncode == 0 and "hub-spoke-choice" in helped.stdout
    assert "segment" in _cli("generate", "hub-spoke-choice", "--help").stdout
    out = tmp_path / "c.toml"
    done = _cli("generate", "hub-spoke-choice", "--spokes", "2", "--alpha", "1.2", "--periods",
                "60", "--seed", "1", "--out", str(out), "--json")
    assert done.returncode == 0, done.stderr
    info = json.loads(done.stdout)
    assert (info["products"], info["segments"], info["demand_kind"]) == (12, 12, "choice")
    assert round(info["alpha"], 9) == 1.2
    got, want = load_scenario(out), small()
    assert got.demand.kind == "choice"
    np.testing.assert_array_equal(got.network.capacities, want.network.capacities)
    np.testing.assert_array_equal(got.demand.sale_probabilities(), want.demand.sale_probabilities())
    bad = _cli("generate", "hub-spoke-choice", "--spokes", "0", "--alpha", "1", "--out",
               str(tmp_path / "b.toml"))
    assert bad.returncode == 2 and "spokes" in bad.stderr
    assert len(bad.stderr.strip().splitlines()) == 1 and not (tmp_path / "b.toml").exists()


def test_four_spokes_give_forty_segments_one_flexible_and_one_price_sensitive_per_market():
    s = generate("hub-spoke-choice", spokes=4, alpha=1.0, periods=20, seed=0)
    ids = s.demand.customer_type_ids(s.network)
    assert s.network.n_products == 40 and len(ids) == 40  # 20 markets x 2 segments
    assert sum(i.endswith("-flex") for i in ids) == sum(i.endswith("-price") for i in ids) == 20


# ---------------------------------------------------------------- compare
@pytest.fixture(scope="module")
def comparison():
    s = small()
    return compare(s.network, s.demand, methods=["exact", "cdlp", "cdpd", "cdlp-sets", *VIEWS],
                   paths=400, seed=3, scenario=s.name)


def test_compare_on_choice_measures_against_the_exact_dp(comparison):
    ds = comparison
    rows = {r["method"]: r for r in ranked(ds)}
    assert all(r["status"] == "ran" for r in rows.values()), rows
    assert ds.attrs["reference_kind"] == "optimum" and ds.attrs["reference_method"] == "exact"
    optimum = rows["exact"]["value"]
    assert rows["cdlp"]["value"] >= optimum - 1e-6 * optimum  # CDLP is an upper bound
    exact = rows["exact"]
    assert abs(exact["revenue_mean"] - optimum) <= 3 * exact["revenue_stderr"]
    for r in rows.values():
        assert r["revenue_mean"] <= optimum + 3 * r["revenue_stderr"], r["method"]
        assert r["check"] == "ok"


def test_compare_labels_the_independent_demand_view(comparison, tmp_path):
    from rmkit.cli.compare import comparison_tables

    ds = comparison
    label = dict(zip(ds.method.values.tolist(),
                     ds["assumes_independent_demand"].values.tolist(), strict=True))
    assert label == {"exact": "", "cdlp": "", "cdpd": "", "cdlp-sets": "",
                     "dlp:independent": "all_offered", "emsrb:independent": "all_offered"}
    control = dict(zip(ds.method.values.tolist(), ds["control"].values.tolist(), strict=True))
    assert control["emsrb:independent"] == "nested"  # the wrapped method's control
    rows = {r["method"]: r for r in ranked(ds)}
    assert rows["dlp:independent"]["label"] == f"{ASSUMES_INDEPENDENT} (all_offered)"
    assert rows["cdpd"]["label"] == "" and rows["cdpd"]["assumes_independent_demand"] is None
    tables, notes = comparison_tables(ds)
    ranking = tables[0]
    col = ranking.columns.index("demand assumption")
    for row in ranking.rows:
        assert (row[col] == "assumes independent demand (all_offered)") == (row[1] in VIEWS)
    printed = {row[1]: row[2] for row in ranking.shown}
    assert printed["dlp:independent"] == "heuristic; assumes independent demand"
    assert any(n.startswith("assumes independent demand: ") for n in notes)
    # a view's result carries the mark too, and so does a simulation of it
    res = get_solver("dlp:independent").solve(small().network, small().demand)
    assert res.payload["assumes_independent_demand"] == "all_offered"
    assert assumption_of(get_solver("emsrb:independent", approximation="first_choice")) == (
        "assumes independent demand (first_choice)")
    assert assumption_of(get_solver("dlp")) == ""


def test_compare_command_writes_the_label_into_its_csv(tmp_path):
    scen = tmp_path / "c.toml"
    assert _cli("generate", "hub-spoke-choice", "--spokes", "2", "--alpha", "1.2", "--periods",
                "60", "--seed", "1", "--out", str(scen)).returncode == 0
    table = tmp_path / "t.csv"
    done = _cli("compare", str(scen), "--methods", "cdlp,dlp:independent", "--paths", "50",
                "--csv", str(table), "--json")
    assert done.returncode == 0, done.stderr
    with table.open(newline="") as f:
        rows = {r["method"]: r for r in csv.DictReader(f)}
    assert rows["dlp:independent"]["demand assumption"] == "assumes independent demand (all_offered)"
    assert rows["cdlp"]["demand assumption"] == ""
    out = json.loads(done.stdout)
    assert out["reference"]["kind"] == "optimum"  # exact solved in the background
    by = {m["method"]: m for m in out["methods"]}
    assert by["dlp:independent"]["assumes_independent_demand"] == "all_offered"
    bad = _cli("compare", str(scen), "--methods", "cdlp:independent")
    assert bad.returncode == 2 and "does not solve independent demand" in bad.stderr


def test_compare_uses_the_best_bound_where_the_exact_dp_does_not_fit():
    s = generate("hub-spoke-choice", spokes=3, alpha=1.2, periods=100, seed=1)
    ds = compare(s.network, s.demand, methods=["exact", "cdlp", "cdpd", "dlp:independent"],
                 paths=150, seed=2)
    rows = {r["method"]: r for r in ranked(ds)}
    assert rows["exact"]["status"] == "skipped" and "states" in rows["exact"]["reason"]
    assert ds.attrs["reference_kind"] == "best bound" and ds.attrs["reference_method"] == "cdlp"
    bound = rows["cdlp"]["value"]
    for name in ("cdlp", "cdpd", "dlp:independent"):
        r = rows[name]
        assert r["revenue_mean"] <= bound + 3 * r["revenue_stderr"], name
        assert r["gap_percent"] == pytest.approx(100 * (bound - r["revenue_mean"]) / bound)


# ---------------------------------------------------------------- calibrate
@pytest.mark.parametrize("heuristic", ["cdpd", "dlp:independent"])
def test_calibrate_on_choice_against_the_exact_dp(heuristic):
    s = small()
    ds = calibrate(s.network, s.demand, heuristic, {"multiplier": "0.8:1.4"}, paths=80, seed=4)
    rep = calibration_report(ds)
    ref = rep["reference"]
    assert ref["kind"] == "optimum" and ref["method"] == "exact"
    for which in ("default", "tuned"):
        r = rep[which]
        assert r["fresh_revenue"] <= ref["value"] + 3 * r["fresh_stderr"], which
        assert r["revenue"] >= 0.5 * ref["value"]
    assert rep["evaluations"] >= 3


# ---------------------------------------------------------------- sweep
CHOICE_GRID = """
[sweep]
name = "choice"
seeds = 1

[[scenario]]
generator = "hub-spoke-choice"
settings = { spokes = 2, alpha = 1.2, periods = 60, seed = 1 }

[[method]]
method = "cdlp"

[[method]]
method = "exact"

[[method]]
method = "dlp:independent"

[[policy]]
method = "cdpd"
paths = 200

[[policy]]
method = "dlp:independent"
paths = 200
"""


def test_sweep_on_a_choice_family(tmp_path):
    distributed = pytest.importorskip("distributed")
    from rmkit.workflows.sweep import load_grid, open_sweep, run_sweep

    path = tmp_path / "grid.toml"
    path.write_text(CHOICE_GRID, encoding="utf-8")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=True,
                                  dashboard_address=":0") as cluster:
        report = run_sweep(load_grid(path), tmp_path / "store",
                           scheduler=cluster.scheduler_address, progress=False)
    assert report.computed == 5 and report.failed == 0
    ds = open_sweep(tmp_path / "store").isel(scenario=0, seed=0)
    value = {str(m): float(v) for m, v in zip(ds.method.values, ds["value"].values, strict=True)}
    se = {str(m): float(v) for m, v in zip(ds.method.values, ds["value_stderr"].values,
                                           strict=True)}
    assert value["cdlp"] >= value["exact"] * (1 - 1e-9)
    for policy in ("cdpd-policy", "dlp:independent-policy"):
        assert value[policy] <= value["exact"] + 3 * se[policy], policy
    assert value["cdpd-policy"] > value["dlp:independent-policy"]
    kind = dict(zip(ds.method.values.tolist(), ds["kind"].values.tolist(), strict=True))
    assert kind["exact"] == "optimum" and kind["dlp:independent"] == "heuristic"
    assumed = dict(zip(ds.method.values.tolist(),
                       ds["assumes_independent_demand"].values.tolist(), strict=True))
    assert assumed["dlp:independent-policy"] == "all_offered" and assumed["cdpd-policy"] == ""


@pytest.mark.parametrize("name", ["emsrb:independent", "dpd:independent", "davn:independent"])
def test_a_view_result_is_replayed_by_the_wrapped_methods_control(name):
    """A view's result steers sales by the wrapped method's control (nested limits, tables),
    never by whatever arrays it happens to hold: simulated from the result or re-solved by name,
    the same numbers."""
    from rmkit import simulate

    s = small()
    res = get_solver(name).solve(s.network, s.demand)
    by_result = simulate(s.network, s.demand, res, paths=60, seed=5)
    by_name = simulate(s.network, s.demand, name, paths=60, seed=5)
    assert by_result.attrs["control"] == get_solver(name).tags.control != "bid_price"
    np.testing.assert_array_equal(by_result["revenue"].values, by_name["revenue"].values)
    assert by_result.attrs["assumes_independent_demand"] == "all_offered"
