"""Better policies where the gap is widest (alpha = 1.6, 8 spokes): which closes it?

Run by hand: ``python benchmarks/bench_better_policies.py [--paths N] [--seed S]
[--instances a,b] [--only label,label] [--out results.json]``.

Per instance (default rm_200_8_1.6_4.0 and rm_200_8_1.6_8.0, shipped in rmkit/data/hub-spoke;
H. Topaloglu (2009), Operations Research 57(3):637-649) it solves the deterministic bounds ``lr``
and ``alp`` and takes the lower as the yardstick, then simulates every policy configuration on the
same request streams (common random numbers: ``simulate`` with one seed draws the same paths for
every policy) and reports for each: mean revenue +- standard error, the paired difference against
``lr`` re-solved 5 times (the published protocol) with its paired standard error, and the gap to
the best bound with its 95% interval (:func:`rmkit.workflows.stats.gap_estimate`; the bound is
deterministic, so the interval is the policy's own).

Configurations:

* ``lr`` re-solved 5, 20, 50 times (each re-solve warm-starts from the run's period-0 split and
  stops when the bid prices at the state settle: :meth:`rmkit.methods.lr.LagrangianRelaxation.
  _resolve`);
* ``dpd`` re-solved 5, 20, 50 times;
* ``dlp-threshold`` (Bumpensanti & Wang 2020, Management Science 66(7)) re-solved 5, 50 and 200
  (every period) times;
* ``dlp`` bid prices re-solved 5 times, for contrast;
* ``lr-rollout`` (one-step rollout on the ``lr`` table: :mod:`rmkit.controls.rollout`) re-solved
  5 and 20 times with its defaults (64 streams, z = 2), and the plain rollout (z = 0) for
  contrast.

``lr r50`` is the registered ``lr-frequent`` (50 re-solves) and ``lr-rollout r5`` the registered
``lr-rollout`` under the published 5 re-solves.

Results are appended to ``--out`` (JSON, one record per instance and configuration) as they come,
so a stopped run keeps what it finished; ``--only`` runs some configurations. The machine is
shared and noisy: compare seconds within one run.
"""

from __future__ import annotations

import argparse
import json
import math
import time
import warnings
from pathlib import Path

import numpy as np

from rmkit import get_solver
from rmkit.model.scenario import load_scenario
from rmkit.workflows.simulate import simulate
from rmkit.workflows.stats import gap_estimate, paired_differences

DATA = Path(__file__).resolve().parents[1] / "rmkit" / "data" / "hub-spoke"
INSTANCES = ("rm_200_8_1.6_4.0", "rm_200_8_1.6_8.0")
BASELINE = "lr r5"
CONFIGS = (
    ("lr r5", "lr", 5, {}),
    ("lr r20", "lr", 20, {}),
    ("lr r50", "lr", 50, {}),
    ("dpd r5", "dpd", 5, {}),
    ("dpd r20", "dpd", 20, {}),
    ("dpd r50", "dpd", 50, {}),
    ("dlp-threshold r5", "dlp-threshold", 5, {}),
    ("dlp-threshold r50", "dlp-threshold", 50, {}),
    ("dlp-threshold r200", "dlp-threshold", 200, {}),
    ("dlp r5", "dlp", 5, {}),
    ("lr-rollout r5", "lr-rollout", 5, {}),
    ("lr-rollout r5 z0", "lr-rollout", 5, {"z": 0.0}),
    ("lr-rollout r20", "lr-rollout", 20, {}),
)


def bounds(net, dem) -> dict[str, float]:
    out = {}
    for name in ("lr", "alp"):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)
            out[name] = float(get_solver(name).solve(net, dem, seed=0).value)
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--paths", type=int, default=100)
    parser.add_argument("--seed", type=int, default=2009)
    parser.add_argument("--instances", default=",".join(INSTANCES))
    parser.add_argument("--only", default="", help="comma-separated configuration labels")
    parser.add_argument("--out", default="", help="append JSON records to this file")
    args = parser.parse_args()
    only = {s.strip() for s in args.only.split(",") if s.strip()}
    configs = [c for c in CONFIGS if not only or c[0] in only or c[0] == BASELINE]
    for name in args.instances.split(","):
        scen = load_scenario(DATA / f"{name}.txt.gz")
        net, dem = scen.network, scen.demand
        b = bounds(net, dem)
        best = min(b, key=b.get)
        print(f"\n== {name}: {net.n_legs} legs, {net.n_products} products, {dem.n_periods} "
              f"periods; bounds " + ", ".join(f"{k} {v:,.1f}" for k, v in b.items())
              + f"; yardstick {best}; {args.paths} paths, seed {args.seed}", flush=True)
        print(f"  {'policy':<20} {'revenue':>10} {'+- SE':>7} {'vs ' + BASELINE:>12} "
              f"{'+- SE':>6} {'gap %':>6} {'95% CI':>15} {'seconds':>8}", flush=True)
        base = None
        for label, method, resolve, params in configs:
            start = time.perf_counter()
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)
                ds = simulate(net, dem, method, paths=args.paths, seed=args.seed,
                              resolve=resolve, params=params)
            seconds = time.perf_counter() - start
            r = np.asarray(ds["revenue"].values, dtype=np.float64)
            if label == BASELINE:
                base = r
            d = paired_differences(r[None, :], base[None, :]) if base is not None else None
            g = gap_estimate(r, b[best])
            rec = {
                "instance": name, "policy": label, "method": method, "resolve": resolve,
                "paths": args.paths, "seed": args.seed, "revenue_mean": float(r.mean()),
                "revenue_stderr": float(r.std(ddof=1) / math.sqrt(r.size)),
                "difference_mean": float(d.mean[0, 0]) if d is not None else None,
                "difference_stderr": float(d.stderr[0, 0]) if d is not None else None,
                "bound": b[best], "bound_method": best, "bounds": b,
                "gap_percent": g.percent, "gap_percent_ci_low": g.percent_ci_low,
                "gap_percent_ci_high": g.percent_ci_high, "seconds": seconds,
                "summary": str(ds.attrs.get("summary", "")),
            }
            diff = ("-" if d is None else f"{rec['difference_mean']:+,.1f}")
            dse = ("-" if d is None else f"{rec['difference_stderr']:.1f}")
            print(f"  {label:<20} {rec['revenue_mean']:>10,.1f} {rec['revenue_stderr']:>7.1f} "
                  f"{diff:>12} {dse:>6} {g.percent:>6.2f} "
                  f"{f'[{g.percent_ci_low:.2f}, {g.percent_ci_high:.2f}]':>15} {seconds:>8.1f}",
                  flush=True)
            if args.out:
                with open(args.out, "a", encoding="utf-8") as fh:
                    fh.write(json.dumps(rec) + "\n")


if __name__ == "__main__":
    main()
