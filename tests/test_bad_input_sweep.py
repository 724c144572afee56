"""Faults in a sweep store and at the cluster's edges: truncated, garbled, empty, misplaced and
deleted cell files are set aside (kept as ``.corrupt``) and recomputed, every cell is stored once
with the same numbers, the index has one row per cell, the dashboard is off unless asked for and
only on this machine, and Ctrl-C to the whole process group prints no worker traceback."""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import time

import numpy as np
import pytest

from rmkit import InputError
from rmkit.workflows.sweep import load_grid, open_sweep, run_sweep
from tests.conftest import ROOT

distributed = pytest.importorskip("distributed")

GRID = """
[sweep]
name = "faults"
seeds = [0, 1, 3]

[[scenario]]
generator = "line"
settings = { legs = 2, alpha = 1.2, periods = 30, seed = 4 }

[[method]]
method = "dlp"

[[policy]]
method = "dlp"
paths = 60
"""


@pytest.fixture(scope="module")
def cluster():
    from distributed import LocalCluster

    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True, host="127.0.0.1",
                      dashboard_address=":0") as c:
        yield c.scheduler_address


@pytest.fixture(scope="module")
def first_run(tmp_path_factory, cluster):
    folder = tmp_path_factory.mktemp("faults")
    (folder / "grid.toml").write_text(GRID)
    store = folder / "store"
    report = run_sweep(load_grid(folder / "grid.toml"), store, scheduler=cluster, progress=False)
    assert report.computed == 6 and report.corrupt == []
    return folder, open_sweep(store, paths=True)


def numbers(ds) -> dict[str, np.ndarray]:
    return {k: ds[k].values for k in ("value", "value_stderr", "status", "revenue")}


def test_bad_cell_files_are_set_aside_and_recomputed(tmp_path, first_run, cluster, capfd):
    folder, reference = first_run
    store = tmp_path / "store"
    shutil.copytree(folder / "store", store)
    grid = load_grid(folder / "grid.toml")
    ids = json.loads((store / "grid.json").read_text())["cells"]
    cells = store / "cells"
    path = {cid: cells / f"{cid}.nc" for cid in ids}
    whole = path[ids[0]].read_bytes()
    path[ids[0]].write_bytes(whole[: len(whole) // 2])                       # truncated
    path[ids[1]].write_bytes(np.random.default_rng(0).bytes(len(whole)))    # random bytes
    path[ids[2]].write_bytes(b"")                                           # zero length
    shutil.copyfile(path[ids[4]], path[ids[3]])                             # another cell's file
    path[ids[5]].unlink()                                                   # deleted
    evidence = {cid: path[cid].read_bytes() for cid in ids[:4]}

    report = run_sweep(grid, store, scheduler=cluster, progress=False)

    assert sorted(report.corrupt) == sorted(ids[:4])
    assert report.computed == 5 and report.resumed == 1
    notice = [line for line in capfd.readouterr().err.splitlines() if "set aside" in line]
    assert len(notice) == 1 and all(cid in notice[0] for cid in ids[:4])
    for cid in ids[:4]:  # the bad files are kept, byte for byte, beside the recomputed ones
        assert (cells / f"{cid}.nc.corrupt").read_bytes() == evidence[cid]
    assert sorted(p.name[:-3] for p in cells.glob("*.nc")) == sorted(ids)
    rows = [json.loads(line)["cell"] for line in (store / "index.jsonl").read_text().splitlines()]
    assert sorted(rows) == sorted(ids)  # one row per cell: no duplicate after a recompute
    again = open_sweep(store, paths=True)
    for key, value in numbers(reference).items():
        assert np.array_equal(numbers(again)[key], value, equal_nan=value.dtype.kind == "f"), key

    # a second rerun finds nothing to do and sets nothing aside
    report = run_sweep(grid, store, scheduler=cluster, progress=False)
    assert report.computed == 0 and report.corrupt == []


def test_reading_a_store_with_a_misplaced_cell_is_one_clear_error(tmp_path, first_run):
    folder, _ = first_run
    store = tmp_path / "store"
    shutil.copytree(folder / "store", store)
    ids = json.loads((store / "grid.json").read_text())["cells"]
    shutil.copyfile(store / "cells" / f"{ids[1]}.nc", store / "cells" / f"{ids[0]}.nc")
    with pytest.raises(InputError, match=rf"{ids[0]}\.nc: holds cell '{ids[1]}'; run 'rmkit sweep'"):
        open_sweep(store)


PROBE = """
import urllib.error, urllib.request
from rmkit.workflows.sweep.runner import _start_client

def status(url):
    try:
        with urllib.request.urlopen(url, timeout=10) as response:
            return response.status
    except urllib.error.HTTPError as err:
        return err.code

if __name__ == "__main__":
    for dashboard in (False, True):  # off first: dask remembers a page once it served one
        client, local = _start_client(None, 1, dashboard)
        print(dashboard, local.scheduler_address, local.dashboard_link,
              status(local.dashboard_link), flush=True)
        client.close()
        local.close()
"""


def test_local_cluster_listens_on_this_machine_only(tmp_path):
    (tmp_path / "probe.py").write_text(PROBE)
    out = subprocess.run([sys.executable, "probe.py"], cwd=tmp_path, capture_output=True,
                         text=True, timeout=300, env={**os.environ, "PYTHONPATH": str(ROOT)})
    rows = [line.split() for line in out.stdout.splitlines()]
    assert [r[0] for r in rows] == ["False", "True"], out.stderr
    for _, scheduler, link, _status in rows:
        assert scheduler.startswith("tcp://127.0.0.1:") and link.startswith("http://127.0.0.1:")
    assert [r[3] for r in rows] == ["404", "200"]  # the dashboard page exists only on request


def test_local_workers_log_nothing_below_critical():
    # a worker closing mid-heartbeat logs a traceback at ERROR from distributed.worker, which
    # silence_logs does not reach (it sets only the nanny's logger in the worker process)
    import logging

    from rmkit.workflows.sweep.runner import _start_client

    client, cluster = _start_client(None, 1)
    try:
        levels = client.run(lambda: logging.getLogger("distributed.worker").getEffectiveLevel())
    finally:
        client.close()
        cluster.close()
    assert list(levels.values()) == [logging.CRITICAL]


def test_ctrl_c_to_the_process_group_prints_no_worker_traceback(tmp_path):
    (tmp_path / "grid.toml").write_text(GRID.replace("seeds = [0, 1, 3]", "seeds = 12")
                                        .replace("paths = 60", "paths = 3000"))
    store = tmp_path / "store"
    proc = subprocess.Popen(
        [sys.executable, "-m", "rmkit", "sweep", "grid.toml", "--workers", "2", "--out",
         str(store), "--no-progress"],
        cwd=tmp_path, env={**os.environ, "PYTHONPATH": str(ROOT)}, stdout=subprocess.PIPE,
        stderr=subprocess.PIPE, text=True, start_new_session=True,
    )
    try:
        deadline = time.monotonic() + 180
        while time.monotonic() < deadline and proc.poll() is None:
            if store.exists() and list((store / "cells").glob("*.nc")):
                os.killpg(proc.pid, signal.SIGINT)  # Ctrl-C in a terminal: the whole group
                break
            time.sleep(0.05)
        _, err = proc.communicate(timeout=120)
    finally:
        if proc.poll() is None:
            proc.kill()  # the process this test started
    assert proc.returncode == 130, err
    assert "Traceback" not in err and "KeyboardInterrupt" not in err, err
    assert "run the same command to resume" in err


@pytest.mark.parametrize(("seeds", "pattern"), [
    (10**15, r"grid sweep\.seeds: 1,000,000,000,000,000 seeds needs about .* of memory available"),
    ([0, 2**64], r"grid sweep\.seeds: seeds must be whole numbers in \[0, 9223372036854775807\]"),
])
def test_grid_seeds_are_checked_before_expanding(seeds, pattern):
    from rmkit.workflows.sweep import grid_from_dict

    grid = {"sweep": {"seeds": seeds}, "method": [{"method": "dlp"}],
            "scenario": [{"generator": "line", "settings": {"legs": 2, "alpha": 1.0}}]}
    with pytest.raises(InputError, match=pattern):
        grid_from_dict(grid)
