"""Benchmark: ``rmkit compare`` with every method on the largest public instance, re-solved.

Run by hand (not a test): ``python benchmarks/bench_compare.py [--paths 500] [--resolve 5]``.

The comparison of issue 15 (goal: under 3 minutes on the project's 2-core machine):
rm_600_8_1.6_8.0 (16 legs, 144 products, 600 periods), every default method, 5 re-solves (the
published protocol) and 500 paths, in one process, as the command runs it. Prints the wall time
of the whole comparison and each method's solve and simulation seconds (from the result), so a
change can be traced to the method it moved. Set ``NUMBA_NUM_THREADS=1`` to see it on one core
(the re-solve rounds of lr and rlp and the replay kernel then run on one thread).

The machine is shared and noisy: compare runs made back to back, not figures from other days.
"""

from __future__ import annotations

import argparse
import sys
import time
import warnings
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:  # run as a script from anywhere: use this checkout's rmkit
    sys.path.insert(0, str(ROOT))

INSTANCE = ROOT / "rmkit" / "data" / "hub-spoke" / "rm_600_8_1.6_8.0.txt.gz"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--paths", type=int, default=500)
    parser.add_argument("--resolve", type=int, default=5)
    parser.add_argument("--seed", type=int, default=0)
    args = parser.parse_args()

    import numba

    from rmkit import load_scenario
    from rmkit.workflows.compare import compare

    scenario = load_scenario(INSTANCE)
    started = time.perf_counter()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # counted in the result's attrs
        ds = compare(scenario.network, scenario.demand, paths=args.paths, resolve=args.resolve,
                     seed=args.seed, scenario=INSTANCE.name)
    wall = time.perf_counter() - started
    print(f"compare {INSTANCE.name}, {args.paths} paths, {args.resolve} re-solves, "
          f"{numba.get_num_threads()} numba thread(s): {wall:.1f} s wall ({wall / 60:.2f} min)")
    ran = ds["status"].values == "ran"
    rows = sorted(zip(ds.method.values[ran], ds["solve_seconds"].values[ran],
                      ds["simulate_seconds"].values[ran], strict=True),
                  key=lambda r: -np.nan_to_num(r[1] + np.nan_to_num(r[2])))
    print(f"  {'method':16s} {'solve s':>8s} {'simulate s':>11s}")
    for name, solve, sim in rows:
        sim_text = "-" if not np.isfinite(sim) else f"{sim:.1f}"
        print(f"  {name:16s} {solve:8.1f} {sim_text:>11s}")


if __name__ == "__main__":
    main()
