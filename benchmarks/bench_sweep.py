"""Sweep speed-up: the same 48-cell sweep on a local dask cluster of 1 and of 2 worker processes.

Cells: the perfect-hindsight bound (1000 samples) and a 500-path DLP bid-price policy re-solved 5
times, on the 24 public 200-period hub-and-spoke instances (Topaloglu 2009, in ../shared). The
DLP bound itself is left out: at about 0.1 s a cell it would only measure scheduling overhead.

Wall times include starting the cluster, its worker processes' imports and writing every cell to
the store: what a user waits for. A small warm-up sweep runs first so both runs find numba's
on-disk caches filled. The two runs must give identical numbers (checked). Goal: speed-up >= 1.7
on a 2-core machine. The machine may be shared: the load average before each run is printed
beside the figures; compare the ratio from one run of this script, not absolute times.

Run by hand:  python benchmarks/bench_sweep.py [--shared PATH] [--cells-per-method N]
"""

from __future__ import annotations

import argparse
import os
import shutil
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
DEFAULT_SHARED = HERE.parent.parent / "shared" / "benchmarks" / "hub-spoke"

GRID = """
[sweep]
name = "bench-{label}"
seeds = [0]

[[scenario]]
files = {files}

[[method]]
method = "ph"
params = {{ samples = 1000 }}

[[policy]]
method = "dlp"
paths = 500
resolves = 5
"""


def write_grid(folder: Path, files: list[Path], label: str) -> Path:
    path = folder / f"{label}.toml"
    quoted = "[" + ", ".join(f'"{f}"' for f in files) + "]"
    path.write_text(GRID.format(label=label, files=quoted), encoding="utf-8")
    return path


def timed_sweep(grid_path: Path, store: Path, workers: int) -> tuple[float, object]:
    from rmkit.workflows.sweep import load_grid, open_sweep, run_sweep

    grid = load_grid(grid_path)
    start = time.perf_counter()
    report = run_sweep(grid, store, workers=workers, progress=False)
    wall = time.perf_counter() - start
    assert report.computed == grid.n_cells and report.failed == 0, report.failures
    return wall, open_sweep(store, paths=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--shared", type=Path, default=DEFAULT_SHARED,
                        help="folder of the public hub-and-spoke instances")
    parser.add_argument("--cells-per-method", type=int, default=24,
                        help="instances to use (24 = all 200-period ones; fewer for a quick look)")
    args = parser.parse_args()
    files = sorted(args.shared.glob("rm_200_*.txt.gz"))[: args.cells_per_method]
    if not files:
        raise SystemExit(f"no rm_200_*.txt.gz in {args.shared}")
    work = Path(tempfile.mkdtemp(prefix="rmkit-bench-sweep-"))
    try:
        timed_sweep(write_grid(work, files[:1], "warmup"), work / "warmup.sweep", 2)
        grid = write_grid(work, files, "full")
        rows = []
        results = {}
        for workers in (1, 2):
            load = os.getloadavg()[0]
            wall, ds = timed_sweep(grid, work / f"w{workers}.sweep", workers)
            results[workers] = ds
            rows.append((workers, wall, float(ds["seconds"].sum()), load))
        one, two = results[1], results[2]
        same = all(np.array_equal(one[k].values, two[k].values, equal_nan=True)
                   for k in ("value", "value_stderr", "revenue"))
        n_cells = int(one["value"].size)
        print(f"sweep of {n_cells} cells ({len(files)} instances x ph bound, 500-path dlp policy "
              f"with 5 re-solves) on {os.cpu_count()} CPUs")
        # busy workers = cell seconds / wall: how many workers computed on average; less sensitive
        # than wall time to other jobs slowing the cells themselves
        print(f"{'workers':>8} {'wall s':>9} {'cell s (sum)':>13} {'busy workers':>13} "
              f"{'load avg before':>16}")
        for workers, wall, cell_s, load in rows:
            print(f"{workers:>8} {wall:>9.1f} {cell_s:>13.1f} {cell_s / wall:>13.2f} {load:>16.2f}")
        speedup = rows[0][1] / rows[1][1]
        print(f"speed-up 2 workers vs 1: {speedup:.2f}x (goal >= 1.7x)")
        print(f"identical numbers with 1 and 2 workers: {same}")
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
