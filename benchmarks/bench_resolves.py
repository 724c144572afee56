"""Benchmark: the simulator's re-solves (the protocol of Topaloglu 2009: 5 re-solves).

Run by hand (not a test)::

    python benchmarks/bench_resolves.py dpd            # batched against one solve per state
    python benchmarks/bench_resolves.py lr             # LR protocol against cold lr solves
    python benchmarks/bench_resolves.py lr-paired INSTANCE [--paths 500]

``dpd``: the dpd policy with 5 re-solves on rm_200_4_1.0_8.0, 300 paths, once with the batched
re-solves (:meth:`rmkit.methods.base.Solver.resolve`: states of a round share leg DPs) and once
solving each state on its own (how the simulator worked before); the revenues must be identical.

``lr``: the LR policy with 5 re-solves and 100 paths on rm_600_8_1.6_8.0, default settings,
in units of a cold ``lr`` solve of the instance timed in the same run (goal: at most 20).

``lr-paired``: the lr policy with its re-solve rule against fully converged re-solves (each
state solved cold, as :meth:`Solver.solve`), on the same customers; the paired difference of
mean revenue with its standard error. The converged run is slow (about 1,300 cold solves on a
200-period 5-spoke instance); its revenues are cached beside this file's output directory
(``--cache``) so the rule can be re-measured alone.

The machine is shared and noisy: read ratios measured in one run.
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

DATA = ROOT / "rmkit" / "data" / "hub-spoke"
SEED = 2009


class OneStateAtATime:
    """A registered method solved cold from each state, one call per state: the simulator's
    re-solves before batching, and the 'fully converged' reference for lr."""

    resolvable = True

    def __init__(self, name: str):
        from rmkit import get_solver
        from rmkit.controls import get_control

        self.solver = get_solver(name)
        self.label = f"{name} (one state at a time)"
        self.control = get_control(self.solver.tags.control)
        self.parameters: dict = {}

    def control_at(self, network, demand, period, capacity, seed):
        from rmkit import BookingState

        state = BookingState(int(period), tuple(int(v) for v in capacity))
        return self.solver.solve(network, demand, state=state, seed=seed)

    def summary(self) -> str:
        return ""


def _load(name: str):
    from rmkit import load_scenario

    return load_scenario(DATA / f"{name}.txt.gz")


def _run(network, demand, source, arrivals):
    from rmkit.workflows.simulate import replay

    t0 = time.perf_counter()
    out = replay(network, demand, source, arrivals, seed=SEED, resolve=5)
    return out, time.perf_counter() - t0


def bench_dpd(paths: int = 300) -> None:
    from rmkit.workflows.policies import make_policy

    name = "rm_200_4_1.0_8.0"
    s = _load(name)
    arrivals = s.demand.sample_arrivals(paths, SEED)
    warm = s.demand.sample_arrivals(3, SEED + 1)
    for source in (make_policy("dpd"), OneStateAtATime("dpd")):  # kernels loaded, not timed
        _run(s.network, s.demand, source, warm)
    batched, batched_s = _run(s.network, s.demand, make_policy("dpd"), arrivals)
    single, single_s = _run(s.network, s.demand, OneStateAtATime("dpd"), arrivals)
    same = np.array_equal(batched.revenue, single.revenue)
    print(f"dpd protocol on {name}, {paths} paths, 5 re-solves ({batched.solves} solves):\n"
          f"  one state at a time {single_s:.2f} s; batched {batched_s:.2f} s: "
          f"{single_s / batched_s:.1f}x\n  mean revenue {batched.revenue.mean():,.2f}; "
          f"identical revenues on every path: {same}")
    if not same:
        raise SystemExit("batched and one-at-a-time re-solves disagree")


def bench_lr(name: str = "rm_600_8_1.6_8.0", paths: int = 100) -> None:
    from rmkit import get_solver
    from rmkit.workflows.policies import make_policy

    s = _load(name)
    get_solver("lr").solve(s.network, s.demand)  # compile / load the numba cache
    t0 = time.perf_counter()
    cold = get_solver("lr").solve(s.network, s.demand)
    cold_s = time.perf_counter() - t0
    arrivals = s.demand.sample_arrivals(paths, SEED)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        out, run_s = _run(s.network, s.demand, make_policy("lr"), arrivals)
    print(f"lr protocol on {name}, {paths} paths, 5 re-solves, default settings:\n"
          f"  cold lr solve {cold_s:.2f} s (bound {cold.value:,.1f}); protocol {run_s:.1f} s = "
          f"{run_s / cold_s:.1f} cold solves ({out.solves} solves, {out.solve_seconds:.1f} s in "
          f"solves)\n  mean revenue {out.revenue.mean():,.1f} +- "
          f"{out.revenue.std(ddof=1) / np.sqrt(paths):,.1f}; {len(caught)} warning(s)\n"
          f"  {out.summary}")


def bench_lr_paired(name: str, paths: int, cache: Path) -> None:
    from rmkit import get_solver
    from rmkit.workflows.policies import make_policy

    s = _load(name)
    arrivals = s.demand.sample_arrivals(paths, SEED)
    t0 = time.perf_counter()
    cold = get_solver("lr").solve(s.network, s.demand)
    cold_s = time.perf_counter() - t0
    rule, rule_s = _run(s.network, s.demand, make_policy("lr"), arrivals)
    print(f"{name}: cold lr {cold_s:.2f} s (bound {cold.value:,.1f}); rule {rule_s:.1f} s = "
          f"{rule_s / cold_s:.1f} cold solves; mean {rule.revenue.mean():,.1f}\n  {rule.summary}",
          flush=True)
    stored = cache / f"{name}_{paths}_{SEED}_converged.npy"
    if stored.exists():
        converged = np.load(stored)
        print(f"  converged revenues read from {stored}")
    else:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # one iteration-limit warning per solve otherwise
            out, conv_s = _run(s.network, s.demand, OneStateAtATime("lr"), arrivals)
        converged = out.revenue
        cache.mkdir(parents=True, exist_ok=True)
        np.save(stored, converged)
        print(f"  converged re-solves {conv_s:.0f} s = {conv_s / cold_s:.0f} cold solves")
    d = rule.revenue - converged
    se = d.std(ddof=1) / np.sqrt(paths)
    print(f"  converged mean {converged.mean():,.1f}; paired difference {d.mean():,.1f} +- "
          f"{se:.1f} ({d.mean() / converged.mean():+.3%})")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("what", choices=["dpd", "lr", "lr-paired"])
    parser.add_argument("instance", nargs="?", default="rm_200_5_1.0_8.0")
    parser.add_argument("--paths", type=int, default=500)
    parser.add_argument("--cache", type=Path, default=Path("bench-cache"))
    args = parser.parse_args()
    if args.what == "dpd":
        bench_dpd()
    elif args.what == "lr":
        bench_lr()
    else:
        bench_lr_paired(args.instance, args.paths, args.cache)


if __name__ == "__main__":
    main()
