"""The certified-gap table of a sweep (rmkit.workflows.sweep.gaps) and ``rmkit sweep --gap-table``,
on two tiny generated instances."""

from __future__ import annotations

import csv
import json
import math
import subprocess
import sys

import numpy as np
import pytest

from rmkit.workflows.stats import gap_estimate
from tests.conftest import ROOT

pytest.importorskip("distributed")

GRID = """
[sweep]
name = "tiny-gaps"
seeds = [0, 1]

[[scenario]]
generator = "hub-spoke"
settings = { spokes = 2, alpha = [1.0, 1.6], kappa = 4.0, periods = 30, seed = 1 }

[[method]]
method = "dlp"

[[method]]
method = "lr"

[[method]]
method = "ir"
params = { samples = 200 }

[[policy]]
method = "dlp"
paths = 60
resolves = 2

[[policy]]
method = "lr"
paths = 60
"""


@pytest.fixture(scope="module")
def swept(tmp_path_factory):
    folder = tmp_path_factory.mktemp("gaps")
    (folder / "grid.toml").write_text(GRID, encoding="utf-8")
    done = subprocess.run(
        [sys.executable, "-m", "rmkit", "sweep", str(folder / "grid.toml"), "--workers", "1",
         "--out", str(folder / "store"), "--gap-table", str(folder / "gaps"), "--json"],
        capture_output=True, text=True, cwd=ROOT, timeout=600)
    assert done.returncode == 0, done.stderr
    return folder, json.loads(done.stdout)


def test_cli_writes_the_three_files_and_the_summary(swept):
    folder, report = swept
    files = report["gap_table"]["files"]
    assert set(files) == {"nc", "csv", "png"}
    assert (folder / "gaps.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    rows = list(csv.reader((folder / "gaps.csv").open()))
    assert rows[0][:3] == ["instance", "best bound", "bound value"]
    assert [r[0] for r in rows[1:3]] == ["hub-spoke_2_1_4_30_s1", "hub-spoke_2_1.6_4_30_s1"]
    assert rows[3][0] == "median" and rows[4][0].startswith("maximum (")
    gaps = [float(r[7]) for r in rows[1:3]]
    assert float(rows[3][7]) == pytest.approx(float(np.median(gaps)))
    assert float(rows[4][7]) == pytest.approx(max(gaps))
    assert report["gap_table"]["median"] == pytest.approx(float(np.median(gaps)))


def test_table_agrees_with_the_sweep_cells(swept):
    import xarray as xr

    from rmkit.workflows.sweep import open_sweep

    folder, _ = swept
    table = xr.load_dataset(folder / "gaps.nc")
    ds = open_sweep(folder / "store", paths=True)
    for q, sc in enumerate(table.scenario.values.tolist()):
        row = table.isel(scenario=q)
        bounds = {m: float(ds["value"].sel({"scenario": sc, "method": m}).mean())
                  for m in ("dlp", "lr", "ir")}
        best = min(bounds, key=bounds.get)
        assert str(row["bound_method"].values) == best
        assert float(row["bound"]) == pytest.approx(bounds[best])
        policies = {m: ds["revenue"].sel({"scenario": sc, "method": m}).values.ravel()
                    for m in ("dlp-policy-r2", "lr-policy")}
        policies = {m: r[np.isfinite(r)] for m, r in policies.items()}
        top = max(policies, key=lambda m: policies[m].mean())
        assert str(row["policy_method"].values) == top
        assert policies[top].size == 120  # the paths of both seeds pooled
        se_b = float(row["bound_stderr"])
        g = gap_estimate(policies[top], bounds[best], se_b)
        assert float(row["gap_percent"]) == pytest.approx(g.percent)
        assert float(row["gap_percent_ci_high"]) == pytest.approx(g.percent_ci_high)
        assert float(row["gap_percent_ci_low"]) < float(row["gap_percent"]) < float(
            row["gap_percent_ci_high"])
        if best == "ir":  # sampled: its error is in the interval, combined in quadrature
            assert se_b > 0 and str(row["gap_pairing"].values) == "independent"
            se_r = float(row["revenue_stderr"])
            assert float(row["gap_percent_stderr"]) == pytest.approx(
                100 * math.sqrt(se_r**2 + se_b**2) / bounds[best])


def test_the_optimum_is_the_yardstick_when_exact_ran(tmp_path):
    from rmkit.workflows.sweep import gap_table, load_grid, open_sweep, run_sweep

    grid = tmp_path / "grid.toml"
    grid.write_text("""
[sweep]
seeds = 1
[[scenario]]
generator = "line"
settings = { legs = 2, classes = 2, alpha = 1.4, periods = 12, seed = 2 }
[[method]]
method = "dlp"
[[method]]
method = "exact"
[[policy]]
method = "dlp"
paths = 40
""", encoding="utf-8")
    run_sweep(load_grid(grid), tmp_path / "store", workers=1, progress=False)
    table = gap_table(open_sweep(tmp_path / "store", paths=True))
    assert str(table["bound_method"].values[0]) == "exact"
    assert str(table["gap_pairing"].values[0]) == "deterministic bound"


def test_a_sweep_without_policies_gets_one_line(tmp_path):
    from rmkit.errors import InputError
    from rmkit.workflows.sweep import gap_table, load_grid, open_sweep, run_sweep

    grid = tmp_path / "grid.toml"
    grid.write_text("""
[[scenario]]
generator = "line"
settings = { legs = 2, classes = 2, alpha = 1.4, periods = 12, seed = 2 }
[[method]]
method = "dlp"
""", encoding="utf-8")
    run_sweep(load_grid(grid), tmp_path / "store", workers=1, progress=False)
    with pytest.raises(InputError, match="gap table: the sweep"):
        gap_table(open_sweep(tmp_path / "store", paths=True))


def test_example_grid_loads_the_six_public_instances():
    from rmkit.workflows.sweep import load_grid

    grid = load_grid(ROOT / "examples" / "gap_grid.toml")
    assert len(grid.scenarios) == 6
    labels = [m.label for m in grid.methods]
    assert {"lr", "alp", "dlp", "ir"} <= set(labels)
    assert sum(m.kind == "policy" for m in grid.methods) == 3
