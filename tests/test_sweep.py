"""Sweeps on real dask LocalClusters: same numbers on 1 or 2 workers, survive a killed worker and
an interrupted client, resume without duplicates, record failing cells.

External reference: the DLP bound of the public instance rm_200_4_1.0_4.0 computed inside a sweep
matches H. Topaloglu (2009), "Using Lagrangian relaxation to compute capacity-dependent bid prices
in network revenue management", Operations Research 57(3):637-649, Table 1 (tests/published.py).
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest

from rmkit import InputError
from rmkit.workflows.sweep import (
    Store,
    expand_cells,
    grid_from_dict,
    load_grid,
    open_sweep,
    run_sweep,
    summary_by_method,
)
from tests.conftest import ROOT, vendored
from tests.published import DLP_BOUND

distributed = pytest.importorskip("distributed")

PUBLIC = "rm_200_4_1.0_4.0"
GRID = f"""
[sweep]
name = "check"
seeds = [0, 3]

[[scenario]]
files = ["{vendored(PUBLIC)}"]

[[scenario]]
generator = "hub-spoke"
settings = {{ spokes = 2, alpha = 1.5, periods = 40, seed = 1 }}

[[method]]
method = "dlp"

[[method]]
method = "dlp"
label = "broken"
params = {{ time_limit = -1 }}

[[policy]]
method = "dlp"
paths = 100
resolves = [0, 2]
"""
N_CELLS = 2 * 4 * 2


def write_grid(folder: Path, text: str = GRID) -> Path:
    path = folder / "grid.toml"
    path.write_text(text, encoding="utf-8")
    return path


def numbers(ds):
    """Everything a cell computes (wall time excluded: it is the one thing allowed to differ)."""
    return {k: ds[k].values for k in ("value", "value_stderr", "status", "error", "revenue")}


def assert_same_numbers(a, b) -> None:
    na, nb = numbers(a), numbers(b)
    for key in na:
        if na[key].dtype.kind == "f":
            assert np.array_equal(na[key], nb[key], equal_nan=True), key
        else:
            assert (na[key] == nb[key]).all(), key


def stored_once(store: Path) -> None:
    """Every grid cell has exactly one file; the index names each stored cell at least once."""
    layout = json.loads((store / "grid.json").read_text())
    files = sorted(p.name[:-3] for p in (store / "cells").glob("*.nc"))
    assert sorted(layout["cells"]) == files
    assert not list((store / "cells").glob(".*"))  # no temporary file left behind
    rows = [json.loads(line) for line in (store / "index.jsonl").read_text().splitlines()]
    assert {r["cell"] for r in rows} == set(files)


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    """The grid run once on a 1-worker cluster reached through its scheduler address."""
    from distributed import LocalCluster

    folder = tmp_path_factory.mktemp("reference")
    grid = load_grid(write_grid(folder))
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True,
                      dashboard_address=":0") as cluster:
        report = run_sweep(grid, folder / "store", scheduler=cluster.scheduler_address,
                           progress=False)
    assert report.computed == N_CELLS and report.resumed == 0
    return open_sweep(folder / "store", paths=True)


def test_reference_run_is_complete_and_matches_published_dlp_bound(reference):
    ds = reference
    assert dict(ds.sizes) == {"scenario": 2, "method": 4, "seed": 2, "path": 100}
    assert list(ds.method.values) == ["dlp", "broken", "dlp-policy", "dlp-policy-r2"]
    dlp = ds["value"].sel({"scenario": PUBLIC, "method": "dlp"}).values
    assert np.round(dlp) == pytest.approx([DLP_BOUND[PUBLIC]] * 2, abs=1)  # Topaloglu 2009, T1
    # bounds sit above every simulated policy mean (DLP and PH are upper bounds)
    ok = ds.sel({"method": ["dlp", "dlp-policy", "dlp-policy-r2"]})
    assert (ok["status"] == "done").all()
    for policy in ("dlp-policy", "dlp-policy-r2"):
        gap = ok["value"].sel({"method": "dlp"}) - ok["value"].sel({"method": policy})
        assert (gap > -3 * ok["value_stderr"].sel({"method": policy})).all()
    # the failing cells are recorded with their error; the others ran
    broken = ds.sel({"method": "broken"})
    assert (broken["status"] == "error").all()
    assert all("time_limit" in e for e in broken["error"].values.ravel())
    table = summary_by_method(ds)
    assert int(table["failed"].sel({"method": "broken"})) == 4
    assert int(table["done"].sel({"method": "dlp"})) == 4


@pytest.fixture(scope="module")
def two_workers():
    """A 2-process LocalCluster shared by the tests below (a killed worker is restarted)."""
    from distributed import Client, LocalCluster

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                      dashboard_address=":0") as cluster, Client(cluster) as client:
        yield cluster, client


def test_two_workers_give_the_same_numbers_as_one(tmp_path, reference, two_workers):
    """The command line against a running cluster's scheduler address (2 worker processes)."""
    cluster, _ = two_workers
    grid_path = write_grid(tmp_path)
    done = subprocess.run(
        [sys.executable, "-m", "rmkit", "sweep", str(grid_path), "--scheduler",
         cluster.scheduler_address, "--out", str(tmp_path / "store"), "--json"],
        capture_output=True, text=True, timeout=300, env={**os.environ, "PYTHONPATH": str(ROOT)},
    )
    assert done.returncode == 1, done.stderr  # 1: the sweep finished with failed cells
    out = json.loads(done.stdout)
    assert (out["computed"], out["resumed"], out["failed"]) == (N_CELLS, 0, 4)
    assert out["methods"]["broken"]["failed"] == 4
    grid = load_grid(grid_path)
    ds = open_sweep(tmp_path / "store", paths=True)
    assert_same_numbers(ds, reference)
    stored_once(tmp_path / "store")
    # a rerun of a finished sweep computes nothing
    again = run_sweep(grid, tmp_path / "store", scheduler=cluster.scheduler_address,
                      progress=False)
    assert again.computed == 0 and again.resumed == N_CELLS
    # --retry-failed recomputes exactly the failed cells, and they stay stored once
    retry = run_sweep(grid, tmp_path / "store", scheduler=cluster.scheduler_address,
                      retry_failed=True, progress=False)
    assert (retry.computed, retry.resumed, retry.failed) == (4, N_CELLS - 4, 4)
    stored_once(tmp_path / "store")


def test_killed_worker_mid_sweep_loses_and_duplicates_nothing(tmp_path, reference, two_workers):
    cluster, client = two_workers
    grid = load_grid(write_grid(tmp_path))
    store = tmp_path / "store"
    killed: list[int] = []
    worker_pids = client.run(os.getpid)
    errors: list[BaseException] = []

    def sweep() -> None:
        try:
            run_sweep(grid, store, scheduler=cluster.scheduler_address, progress=False)
        except BaseException as err:  # surfaced in the main thread below
            errors.append(err)

    runner = threading.Thread(target=sweep)
    runner.start()
    deadline = time.monotonic() + 120
    while not killed and runner.is_alive() and time.monotonic() < deadline:
        busy = [w for w, keys in client.processing().items() if keys and w in worker_pids]
        n_stored = len(list((store / "cells").glob("*.nc"))) if store.exists() else 0
        if n_stored >= 2 and busy:
            os.kill(worker_pids[busy[0]], signal.SIGKILL)  # a worker this test's cluster started
            killed.append(n_stored)
        time.sleep(0.02)
    runner.join(timeout=240)
    assert not runner.is_alive()
    assert not errors, errors
    assert killed and killed[0] < N_CELLS, "the worker was killed while cells were running"
    stored_once(store)
    assert_same_numbers(open_sweep(store, paths=True), reference)


def test_interrupted_sweep_resumes_only_the_missing_cells(tmp_path, reference, two_workers):
    grid_path = write_grid(tmp_path)
    store = tmp_path / "store"
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.Popen(
        [sys.executable, "-m", "rmkit", "sweep", str(grid_path), "--workers", "2", "--out",
         str(store), "--no-progress"],
        cwd=tmp_path, env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )
    try:
        deadline = time.monotonic() + 120
        while time.monotonic() < deadline and proc.poll() is None:
            if store.exists() and len(list((store / "cells").glob("*.nc"))) >= 3:
                proc.send_signal(signal.SIGINT)  # Ctrl-C
                break
            time.sleep(0.05)
        _, err = proc.communicate(timeout=90)
    finally:
        if proc.poll() is None:
            proc.kill()  # the subprocess this test started
    assert proc.returncode == 130, err
    assert "run the same command to resume" in err
    before = len(list((store / "cells").glob("*.nc")))
    assert 3 <= before < N_CELLS
    assert f"interrupted: {before} of {N_CELLS} cells are stored" in err
    report = run_sweep(load_grid(grid_path), store, scheduler=two_workers[0].scheduler_address,
                       progress=False)
    assert report.resumed == before
    assert report.computed == N_CELLS - before
    stored_once(store)
    assert_same_numbers(open_sweep(store, paths=True), reference)


# ------------------------------------------------------------------ no cluster needed
def test_seeds_depend_on_coordinates_not_on_order(tmp_path):
    text = GRID.replace("seeds = [0, 3]", "seeds = [3, 0]")
    text = text.replace('[[method]]\nmethod = "dlp"\n\n', "")
    text += '\n[[method]]\nmethod = "dlp"\n'
    forward, _ = expand_cells(load_grid(write_grid(tmp_path)))
    backward, _ = expand_cells(load_grid(write_grid(tmp_path, text)))
    by_key = {(c.scenario, c.method.label, c.seed): c for c in forward}
    assert len(backward) == len(forward)
    for c in backward:
        twin = by_key[(c.scenario, c.method.label, c.seed)]
        assert (c.cell_id, c.solver_seed, c.demand_seed) == (
            twin.cell_id, twin.solver_seed, twin.demand_seed)
    assert len({c.solver_seed for c in forward}) == len(forward)
    # policies of one scenario and seed share their demand paths (common random numbers)
    demand = {(c.scenario, c.seed): c.demand_seed for c in forward}
    assert all(c.demand_seed == demand[(c.scenario, c.seed)] for c in forward)
    assert len(set(demand.values())) == len(demand)


@pytest.mark.parametrize(
    ("grid", "message"),
    [
        ({"scenario": [{"files": ["nothing-*.toml"]}], "method": [{"method": "dlp"}]},
         r"scenario\[0\]\.files\[0\].*matches no file"),
        ({"scenario": [{"generator": "hub-spoke", "settings": {"spokes": 2, "alpha": 1.0}}]},
         "no \\[\\[method\\]\\]"),
        ({"scenario": [{"generator": "ring"}], "method": [{"method": "dlp"}]}, "unknown family"),
        ({"scenario": [{"generator": "hub-spoke", "settings": {"spokes": 2, "alpha": 1.0}}],
          "method": [{"method": "dlp"}, {"method": "dlp"}]}, "two entries are labelled 'dlp'"),
        ({"scenario": [{"generator": "hub-spoke", "settings": {"spokes": 2, "alpha": 1.0}}],
          "method": [{"method": "nosuch"}]}, "unknown method"),
        ({"scenario": [{"generator": "hub-spoke", "settings": {"spokes": 2, "alpha": 1.0}}],
          "method": [{"method": "dlp", "sample": 3}]}, r"method\[0\]\.sample: unknown field"),
        ({"sweep": {"seeds": [1, 1]}, "scenario": [{"generator": "line",
          "settings": {"legs": 2, "alpha": 1.0}}], "method": [{"method": "dlp"}]}, "seeds repeat"),
    ],
)
def test_bad_grids_name_the_field(tmp_path, grid, message):
    with pytest.raises(InputError, match=message):
        grid_from_dict(grid, tmp_path)


def test_store_refuses_a_folder_that_is_not_a_store(tmp_path):
    (tmp_path / "notes.txt").write_text("mine")
    grid = grid_from_dict({"scenario": [{"generator": "line", "settings": {"legs": 2, "alpha": 1.0}}],
                           "method": [{"method": "dlp"}]})
    cells, _ = expand_cells(grid)
    with pytest.raises(InputError, match="not a sweep store"):
        Store(tmp_path).create(grid, cells)
