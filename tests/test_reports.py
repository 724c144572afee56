"""What each command prints and writes: tables with named columns, --csv, provenance, defaults
stated as used, progress only on a terminal, one warnings line per method, figures readable."""

from __future__ import annotations

import csv
import hashlib
import json
import os
import subprocess
import sys
import tomllib
from pathlib import Path

import numpy as np
import pytest
import tomli_w
import xarray as xr

from rmkit.model.scenario import save_scenario, scenario_from_model
from tests.conftest import DATA, EXAMPLE, ROOT
from tests.instances import small_problem

DEFAULTS = {"seed": 5, "paths": 60, "resolve": 2}


def rmkit(*args: str, **kw) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "rmkit", *args], capture_output=True, text=True,
                          timeout=600, env={**os.environ, "PYTHONPATH": str(ROOT)}, **kw)


@pytest.fixture(scope="module")
def scenario(tmp_path_factory) -> Path:
    """The small test problem as a scenario file with its own [defaults]."""
    folder = tmp_path_factory.mktemp("scenario")
    path = folder / "small.toml"
    net, dem = small_problem()
    save_scenario(scenario_from_model(net, dem, "small"), path)
    data = tomllib.loads(path.read_text())
    data["defaults"] = DEFAULTS
    path.write_text(tomli_w.dumps(data))
    return path


def read_csv(path: Path) -> tuple[list[str], list[dict[str, str]]]:
    with path.open(newline="") as fh:
        rows = list(csv.DictReader(fh))
    with path.open(newline="") as fh:
        return next(csv.reader(fh)), rows


def test_compare_table_csv_json_and_provenance(scenario, tmp_path):
    out = rmkit("compare", str(scenario), "--methods", "exact,dlp,emsrb", "--csv",
                str(tmp_path / "tables"), "--out", str(tmp_path / "c.nc"), "--json")
    assert out.returncode == 0, out.stderr
    data = json.loads(out.stdout)
    # the scenario's [defaults] are the values in force, and the report says so
    assert (data["paths"], data["resolve"], data["seed"]) == (60, 2, 5)
    assert "from the scenario's [defaults]" in data["defaults_from"]
    header, rows = read_csv(tmp_path / "tables" / "ranking.csv")
    for column in ("method", "revenue", "difference vs " + data["best_policy"],
                   "difference 95% low", "difference 95% high", "difference significant",
                   "gap % (estimate)", "gap % 95% low", "gap % 95% high", "solve seconds"):
        assert column in header
    by = {r["method"]: r for r in rows}
    assert set(by) == {"exact", "dlp", "emsrb"}
    assert by["exact"]["gap % (estimate)"] == ""  # the optimum row shows the DP value instead
    assert float(by["exact"]["optimum or upper bound"]) == pytest.approx(
        data["reference"]["value"])
    for r in data["methods"]:  # significance is the paired interval excluding 0
        if r["method"] != data["best_policy"]:
            low, high = r["difference_ci_low"], r["difference_ci_high"]
            assert r["difference_significant"] == (low > 0 or high < 0)
    legs, _ = read_csv(tmp_path / "tables" / "bid_prices.csv")
    assert legs[0] == "method" and len(legs) == 1 + 3
    # provenance: the scenario's sha256 and a copy of it, versions, platform, time
    prov = data["provenance"]
    text = scenario.read_text()
    assert prov["scenario_sha256"] == hashlib.sha256(scenario.read_bytes()).hexdigest()
    assert prov["scenario_copy"] == text
    assert set(prov["versions"]) == {"rmkit", "numpy", "scipy", "highspy", "numba", "xarray"}
    assert prov["created_utc"].endswith("Z") and prov["platform"]
    with xr.open_dataset(tmp_path / "c.nc") as ds:
        assert ds.attrs["scenario_sha256"] == prov["scenario_sha256"]
        assert ds.attrs["scenario_copy"] == text
        assert json.loads(ds.attrs["versions"])["numba"] == prov["versions"]["numba"]


def test_compare_printed_table_names_the_paired_difference_and_the_estimate(scenario):
    out = rmkit("compare", str(scenario), "--methods", "exact,dlp", "--paths", "50")
    assert out.returncode == 0, out.stderr
    assert "vs exact (paired)" in out.stdout and "gap to optimum % (est.)" in out.stdout
    assert "the optimum" in out.stdout and "DP " in out.stdout
    assert "50 paths, 2 re-solves, seed 5 (resolve, seed from the scenario's [defaults])" in (
        out.stdout)


def test_simulate_tables_and_csv(scenario, tmp_path):
    out = rmkit("simulate", str(scenario), "--policy", "fcfs", "--bound", "exact", "--csv",
                str(tmp_path / "sim.csv"))
    assert out.returncode == 0, out.stderr
    assert "never re-solves" in out.stdout  # 2 re-solves asked for, none done, and it says so
    header, rows = read_csv(tmp_path / "sim.csv")
    assert rows[0]["re-solves done"] == "0" and rows[0]["re-solves asked"] == "2"
    assert "gap" in header and "optimum (exact)" in header
    names = {p.name for p in tmp_path.iterdir()}
    assert names == {"sim.csv", "sim-products.csv", "sim-fare_classes.csv", "sim-legs.csv"}
    _, products = read_csv(tmp_path / "sim-products.csv")
    net, dem = small_problem()
    assert [r["product"] for r in products] == list(net.product_ids)
    for r in products:  # requests = sales + spill, each a mean per departure
        assert float(r["requests"]) == pytest.approx(float(r["sales"]) +
                                                     float(r["spill (refused)"]))
    total = sum(float(r["requests"]) for r in products)
    # fcfs sees every request: on average the model's expected requests (a loose sampling check)
    assert total == pytest.approx(float(dem.demand_to_come(0).sum()), rel=0.25)
    _, legs = read_csv(tmp_path / "sim-legs.csv")
    assert [r["leg"] for r in legs] == list(net.leg_ids)
    assert all(0 <= float(r["load factor"]) <= 1 for r in legs)


def test_bound_and_bidprices_tables(scenario, tmp_path):
    out = rmkit("bound", str(scenario), "--method", "dlp", "--csv", str(tmp_path / "b.csv"))
    assert out.returncode == 0, out.stderr
    header, rows = read_csv(tmp_path / "b.csv")
    assert header == ["method", "kind", "value", "std. error", "status", "seconds", "seed"]
    out = rmkit("bidprices", str(scenario), "--method", "davn", "--param", "buckets=2", "--csv",
                str(tmp_path / "bp"), "--out", str(tmp_path / "davn.nc"))
    assert out.returncode == 0, out.stderr
    assert "no optimality claim" in out.stdout and "booking limit" in out.stdout
    header, rows = read_csv(tmp_path / "bp" / "booking_limits.csv")
    assert header == ["leg", "bucket", "products", "bucket fare", "protection level",
                      "booking limit"]
    with xr.open_dataset(tmp_path / "davn.nc") as ds:
        top = ds.sel(bucket=0)  # bucket is a dim only (product_bucket is the (leg, product) map)
        for r in rows:
            if r["bucket"] == "0":
                assert int(r["booking limit"]) == int(top["booking_limit"].sel(leg=r["leg"]))
        fares = ds["bucket_fare"].values
    # padding buckets are not rows: one row per bucket with a fare, plus closed products
    assert sum(1 for r in rows if r["bucket"] != "") == int(np.isfinite(fares).sum())


def test_calibrate_shows_its_search_trail(scenario, tmp_path):
    out = rmkit("calibrate", str(scenario), "--heuristic", "davn", "--search", "buckets=1:3",
                "--param", "davn.law=normal", "--paths", "40", "--csv", str(tmp_path / "cal"))
    assert out.returncode == 0, out.stderr
    assert "the search: settings by revenue" in out.stdout and "exact DP value" in out.stdout
    _, trail = read_csv(tmp_path / "cal" / "trail.csv")
    revenues = [float(r["revenue (search paths)"]) for r in trail]
    assert revenues == sorted(revenues, reverse=True) and len(trail) >= 3
    bad = rmkit("calibrate", str(scenario), "--heuristic", "davn", "--param", "buckets=1:3")
    assert bad.returncode == 2 and "--search buckets=1:3" in bad.stderr


def test_param_has_one_syntax(scenario):
    ok = rmkit("compare", str(scenario), "--methods", "dlp", "--param", "dual=\"min\"",
               "--paths", "20", "--json")
    assert ok.returncode == 0, ok.stderr  # bare NAME=VALUE: one method named
    bad = rmkit("compare", str(scenario), "--methods", "dlp,emsrb", "--param", "dual=\"min\"")
    assert bad.returncode == 2 and "METHOD.dual" in bad.stderr
    ok = rmkit("bound", str(scenario), "--method", "dlp", "--param", "dlp.dual=\"max\"", "--json")
    assert ok.returncode == 0, ok.stderr
    bad = rmkit("bound", str(scenario), "--method", "dlp", "--param", "lr.tol=0.1")
    assert bad.returncode == 2 and "not run here" in bad.stderr


def test_methods_listing_has_every_registered_method_and_fcfs():
    from rmkit.methods.base import load_all

    out = rmkit("methods", "--json")
    assert out.returncode == 0, out.stderr
    entries = {e["name"]: e for e in json.loads(out.stdout)["methods"]}
    assert set(load_all()) | {"fcfs"} == set(entries)
    for name, cls in load_all().items():
        e = entries[name]
        assert e["citation"] == cls.citation and e["demand_kinds"] == list(cls.demand_kinds)
        assert set(e["settings"]) == set(cls.params)
        for p, spec in cls.params.items():
            assert e["settings"][p]["rule"] == spec.rule
    bad = rmkit("simulate", str(EXAMPLE), "--policy", "nope")
    assert bad.returncode == 2 and "--policy: unknown policy 'nope'" in bad.stderr
    assert "valid policies: fcfs" in bad.stderr


def test_defaults_one_source():
    from rmkit.model.scenario import load_scenario
    from rmkit.workflows.defaults import BENCHMARK_RESOLVE, PATHS, RESOLVE, run_settings

    bench = run_settings(load_scenario(DATA / "rm_200_4_1.0_4.0.txt.gz"))
    assert (bench.paths, bench.resolve, bench.seed) == (PATHS, BENCHMARK_RESOLVE, 0) == (1000, 5, 0)
    example = run_settings(load_scenario(EXAMPLE))
    assert (example.paths, example.resolve, example.seed) == (2000, 5, 20261201)
    assert run_settings(load_scenario(EXAMPLE), resolve=0).resolve == 0
    net, dem = small_problem()
    plain = run_settings(scenario_from_model(net, dem, "x"))
    assert plain.resolve == RESOLVE and "rmkit's defaults" in plain.header()
    help_text = " ".join(rmkit("demo", "--help").stdout.split())
    assert "default 2000: the example's" in help_text and "default 5: the example's" in help_text
    for command in ("compare", "simulate", "calibrate"):
        text = " ".join(rmkit(command, "--help").stdout.split())
        assert "else 5 on benchmark files" in text and f"else {PATHS}" in text


def test_solver_warnings_one_line_per_method_details_in_attrs(scenario, tmp_path):
    out = rmkit("simulate", str(scenario), "--policy", "lr", "--param", "max_iterations=2",
                "--resolve", "4", "--paths", "30", "--out", str(tmp_path / "lr.nc"))
    assert out.returncode == 0, out.stderr
    lines = [x for x in out.stderr.splitlines() if x.strip()]
    assert len(lines) == 1 and lines[0].startswith("rmkit simulate: lr: "), out.stderr
    with xr.open_dataset(tmp_path / "lr.nc") as ds:
        counts = json.loads(ds.attrs["warnings"])
    total = sum(counts.values())
    assert total > 1 and lines[0].startswith(f"rmkit simulate: lr: {total} warnings")


def _with_terminal(args: list[str]) -> str:
    """Run a command with stderr on a pseudo-terminal; what it wrote there."""
    import pty

    leader, follower = pty.openpty()
    proc = subprocess.Popen([sys.executable, "-m", "rmkit", *args], stdout=subprocess.PIPE,
                            stderr=follower, env={**os.environ, "PYTHONPATH": str(ROOT),
                                                  "TERM": "xterm", "COLUMNS": "120"})
    os.close(follower)
    chunks = []
    while True:
        try:
            chunk = os.read(leader, 4096)
        except OSError:  # the child closed the terminal
            break
        if not chunk:
            break
        chunks.append(chunk)
    proc.wait(timeout=600)
    os.close(leader)
    assert proc.returncode == 0
    return b"".join(chunks).decode(errors="replace")


def test_progress_only_on_a_terminal(scenario):
    args = ["simulate", str(scenario), "--policy", "dlp", "--resolve", "3", "--paths", "200"]
    assert "rmkit simulate: " in _with_terminal(args)
    assert "rmkit simulate: " not in _with_terminal([*args, "--quiet"])
    assert "rmkit simulate: " not in _with_terminal([*args, "--json"])
    piped = rmkit(*args)
    assert piped.returncode == 0 and piped.stderr == ""


def test_sweep_summary_per_scenario_and_identical_policies(tmp_path):
    grid = tmp_path / "grid.toml"
    # ample capacity (alpha 0.5): the DLP's bid prices are 0, so its policy sells like fcfs
    grid.write_text("""
[sweep]
name = "twins"
seeds = 1

[[scenario]]
generator = "hub-spoke"
settings = { spokes = 2, alpha = [0.5, 1.6], periods = 40, seed = 1 }

[[method]]
method = "dlp"

[[policy]]
method = "dlp"
paths = 40

[[policy]]
method = "fcfs"
paths = 40
""")
    out = rmkit("sweep", str(grid), "--workers", "1", "--csv", str(tmp_path / "t"), "--plot",
                str(tmp_path / "s.png"))
    assert out.returncode == 0, out.stderr
    header, values = read_csv(tmp_path / "t" / "values.csv")
    assert header[0] == "scenario" and len(values) == 2  # one row per scenario, no averaging
    _, twins = read_csv(tmp_path / "t" / "identical_policies.csv")
    assert any("0.5" in r["scenario"] for r in twins)
    assert "ties are accepted" in " ".join(out.stdout.split())
    assert (tmp_path / "s.png").read_bytes()[:4] == b"\x89PNG"
    wrong = rmkit("sweep", str(EXAMPLE))
    assert wrong.returncode == 2 and "is a scenario file, not a sweep grid" in wrong.stderr


def test_comparison_figure_draws_every_method_distinguishably():
    from rmkit.workflows.compare import compare
    from rmkit.workflows.plots import comparison_figure

    net, dem = small_problem()
    ds = compare(net, dem, methods=["exact", "dlp", "rlp", "pnlp", "lr", "dpd", "emsrb",
                                    "davn", "emsrb-heuristic"], paths=40, seed=2, visit_paths=20)
    fig = comparison_figure(ds)
    panels = [ax for ax in fig.axes if ax.get_xlabel().startswith("period")]
    for ax in panels:
        looks = {}
        for line in ax.get_lines():
            look = (str(line.get_color()), line.get_linestyle(), str(line.get_marker()))
            assert look not in looks.values(), (line.get_label(), looks)
            looks[line.get_label()] = look
        drawn = {label.split(" ")[0] for label in looks}
        # bid-price methods are drawn; nested-limit methods are not drawn as bid prices
        assert {"dlp", "rlp", "pnlp", "lr", "dpd", "emsrb-heuristic"} <= drawn
        assert not {"emsrb", "davn"} & drawn
    legend = " ".join(t.get_text() for t in fig.legends[0].get_texts())
    assert "emsrb, davn: nested" in legend and "where it goes" in legend


def test_csv_dash_is_refused_rather_than_made_a_folder(scenario, tmp_path):
    out = rmkit("bound", str(scenario), "--method", "dlp", "--csv", "-", cwd=tmp_path)
    assert out.returncode == 2 and "Traceback" not in out.stderr
    assert out.stderr.strip().count("\n") == 0 and "--csv" in out.stderr and "'-'" in out.stderr
    assert list(tmp_path.iterdir()) == []  # no folder named '-'
