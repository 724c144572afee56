"""Benchmark of the bound ladder (alp, lr-lp, ir) beside lr, ph and dlp on public instances.

Run by hand: ``python benchmarks/bench_bounds.py [--paths N] [--lr-lp-seconds S] [--clarabel]``.
Needs ../shared beside the checkout (the instances of Topaloglu 2009, Operations Research
57(3):637-649). The goal on rm_600_8_1.6_8.0: each bound in under 60 s on the 2-core machine
(alp; the exact LP for LR; ir with 1,000 paths).

Per instance it reports each method's value, standard error where sampled, wall time and status,
and ratios measured in the same run: lr-lp against the subgradient lr, ir against ph on the same
request paths (same seed and count), and the variance reduction of the penalty (variance of the
plain perfect-hindsight path values over that of the penalised ones, same paths). lr-lp runs with
HiGHS under a time limit (``--lr-lp-seconds``); ``--clarabel`` also runs it with Clarabel on the
200-period instance (minutes). The machine is shared and noisy: compare ratios within one run.
"""

from __future__ import annotations

import argparse
import time
import warnings
from pathlib import Path

from rmkit import get_solver
from rmkit.model.scenario import load_scenario

HUB_SPOKE = Path(__file__).resolve().parents[2] / "shared" / "benchmarks" / "hub-spoke"
INSTANCES = ("rm_200_4_1.6_8.0", "rm_600_8_1.6_8.0")


def run(method, net, dem, **settings):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        start = time.perf_counter()
        res = get_solver(method, **settings).solve(net, dem, seed=0)
        return res, time.perf_counter() - start


def line(label, res, seconds) -> None:
    se = f" +- {res.stderr:.3g}" if res.stderr is not None else ""
    print(f"  {label:<26} {res.value:12.2f}{se:<10} {seconds:8.2f} s  {res.status}")


def bench(name: str, paths: int, lr_lp_seconds: float, clarabel: bool) -> None:
    scen = load_scenario(HUB_SPOKE / f"{name}.txt.gz")
    net, dem = scen.network, scen.demand
    print(f"\n== {name}: {net.n_legs} legs, {net.n_products} products, {dem.n_periods} periods")
    dlp, dlp_s = run("dlp", net, dem)
    line("dlp", dlp, dlp_s)
    alp, alp_s = run("alp", net, dem)
    line("alp (HiGHS ipm)", alp, alp_s)
    lr, lr_s = run("lr", net, dem)
    line("lr (subgradient)", lr, lr_s)
    print(f"  {'':<26} certified lower bound {lr.payload['lower_bound']:.2f}")
    lp, lp_s = run("lr-lp", net, dem, time_limit=lr_lp_seconds, max_hinges=10**8)
    line(f"lr-lp (HiGHS, {lr_lp_seconds:g} s cap)", lp, lp_s)
    print(f"  lr-lp / lr time: {lp_s / lr_s:.1f}")
    if clarabel and dem.n_periods <= 200:
        cl, cl_s = run("lr-lp", net, dem, solver="clarabel", max_hinges=10**8)
        line("lr-lp (Clarabel)", cl, cl_s)
        print(f"  lr-lp (Clarabel) / lr time: {cl_s / lr_s:.1f}; lr above the minimum by "
              f"{100 * (lr.value / cl.value - 1):.3f}%")
    ir, ir_s = run("ir", net, dem, samples=paths)
    line(f"ir ({paths} paths)", ir, ir_s)
    print(f"  {'':<26} {ir.message}")
    ph, ph_s = run("ph", net, dem, samples=paths)
    line(f"ph ({paths} paths, same)", ph, ph_s)
    print(f"  ir / ph time: {ir_s / ph_s:.2f}; variance reduction of the penalty (ph var / ir "
          f"var, same paths): {(ph.stderr / ir.stderr) ** 2:.3g}; ir below lr by "
          f"{lr.value - ir.value:.2f} ({100 * (1 - ir.value / lr.value):.3f}%)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--paths", type=int, default=1000)
    parser.add_argument("--lr-lp-seconds", type=float, default=60.0)
    parser.add_argument("--clarabel", action="store_true")
    args = parser.parse_args()
    small = load_scenario(HUB_SPOKE / f"{INSTANCES[0]}.txt.gz")
    run("ir", small.network, small.demand, samples=2, iterations=1)  # compile the kernels
    for name in INSTANCES:
        bench(name, args.paths, args.lr_lp_seconds, args.clarabel)


if __name__ == "__main__":
    main()
