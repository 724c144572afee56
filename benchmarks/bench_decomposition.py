"""Benchmark of the decomposition methods (dpd, lr) on two public hub-and-spoke instances.

Run by hand: ``python benchmarks/bench_decomposition.py [--paths N]``. Needs ../shared beside the
checkout (the instances of Topaloglu 2009, Operations Research 57(3):637-649).

Reports, per instance: the cost of one pass of all leg DPs (values and expected sales); the LR
cold solve (wall time, iterations, bound, status, certified gap); the iterations and wall time
to bring the bound within 0.5% of a long reference run's bound (the goal on rm_600_8_1.6_8.0:
under 10 s); mid-horizon re-solves at the simulator's five points (periods 0, T/5, ..., 4T/5)
on sample paths, warm-started from the period-0 multipliers against cold solves from the DLP
split (default settings, and a warm re-solve on a budget of 60 iterations), as ratios measured
in the same run; and the dpd solve time. The machine is shared and
noisy: compare ratios within one run, not absolute times across runs.
"""

from __future__ import annotations

import argparse
import time
import warnings
from pathlib import Path

import numpy as np

from rmkit import BookingState, get_solver
from rmkit.model.scenario import load_scenario

HUB_SPOKE = Path(__file__).resolve().parents[1] / "rmkit" / "data" / "hub-spoke"
INSTANCES = ("rm_200_4_1.0_4.0", "rm_600_8_1.6_8.0")
BUDGET = 60  # iterations of a budgeted warm re-solve


def timed(fn):
    start = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - start


def lr(net, dem, state=None, **settings):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return get_solver("lr", **settings).solve(net, dem, state=state)


def leg_pass_seconds(net, dem, repeats: int = 20, threads: int = 1) -> float:
    import numba

    from rmkit.kernels.decomposition import leg_acceptance_batch
    from rmkit.kernels.single_leg import leg_values_batch
    from rmkit.methods.lr import dual_split

    prob = np.ascontiguousarray(dem.probabilities)
    lam = dual_split(net, np.zeros(net.n_legs), dem.n_periods)
    caps = np.ascontiguousarray(net.capacities)
    values = np.empty((net.n_legs, dem.n_periods + 1, net.max_capacity + 1))
    occ = np.empty_like(values)
    acc = np.empty(lam.shape)
    leg_values_batch(prob, lam, caps, values)
    leg_acceptance_batch(prob, lam, caps, caps, values, occ, acc)
    before = numba.get_num_threads()
    numba.set_num_threads(min(threads, before))
    try:
        start = time.perf_counter()
        for _ in range(repeats):
            leg_values_batch(prob, lam, caps, values)
            leg_acceptance_batch(prob, lam, caps, caps, values, occ, acc)
        return (time.perf_counter() - start) / repeats
    finally:
        numba.set_num_threads(before)


def resolve_states(net, dem, result, paths: int, seed: int):
    """States at periods 0, T/5, ..., 4T/5 along paths run with the LR bid-price table."""
    T = dem.n_periods
    points = [k * T // 5 for k in range(1, 5)]
    streams = dem.sample_streams(paths, seed)
    table = result["bid_price_table"]
    legs = [net.product_legs(j) for j in range(net.n_products)]
    states = []
    for path in range(paths):
        x = np.array(net.capacities, dtype=np.int64)
        for t in range(T):
            if t in points:
                states.append(BookingState(t, tuple(int(c) for c in x)))
            j = int(streams[path, t])
            if j < 0:
                continue
            used = legs[j]
            if np.all(x[used] >= 1) and net.fares[j] >= table[t, x[used], used].sum():
                x[used] -= 1
    return states


def bench(name: str, paths: int) -> None:
    scen = load_scenario(HUB_SPOKE / f"{name}.txt.gz")
    net, dem = scen.network, scen.demand
    lr(net, dem, max_iterations=2)  # compile the kernels
    print(f"\n== {name}: {net.n_legs} legs, {net.n_products} products, {dem.n_periods} periods")
    one, two = leg_pass_seconds(net, dem, threads=1), leg_pass_seconds(net, dem, threads=2)
    print(f"one pass of all leg DPs (values + expected sales): {one * 1e3:.2f} ms on one numba "
          f"thread, {two * 1e3:.2f} ms on two")

    cold, cold_s = timed(lambda: lr(net, dem))
    iters = cold.payload["iterations"]
    print(f"lr cold, default settings: {cold_s:.2f} s, {iters} iterations, bound {cold.value:.1f}, "
          f"status {cold.status}, certified gap {cold['gap_history'][-1]:.4f}")
    ref, ref_s = timed(lambda: lr(net, dem, max_iterations=800, stall_tol=0.0, tol=1e-5))
    final = ref.value
    print(f"lr reference run: {ref_s:.2f} s, {ref.payload['iterations']} iterations, bound {final:.1f}, "
          f"certified gap {ref['gap_history'][-1]:.4f}")
    hist = ref["bound_history"]
    k = int(np.argmax(hist <= final * 1.005))
    reach, reach_s = timed(lambda: lr(net, dem, max_iterations=k + 1, stall_tol=0.0, tol=1e-5))
    print(f"bound within 0.5% of the reference after {k + 1} iteration(s): {reach_s:.2f} s "
          f"(bound {reach.value:.1f}, {100 * (reach.value / final - 1):.3f}% above)")

    states = resolve_states(net, dem, cold, paths, seed=11)
    lr(net, dem, warm_start=True)  # fill the period-0 cache, as a simulator's first solve would
    rows, budget = [], []
    for st in states:
        w, ws = timed(lambda st=st: lr(net, dem, state=st, warm_start=True))
        c, cs = timed(lambda st=st: lr(net, dem, state=st))
        b, bs = timed(lambda st=st: lr(net, dem, state=st, warm_start=True,
                                       max_iterations=BUDGET))
        budget.append((bs, cs, b.value / c.value - 1))
        target = c.value * 1.001  # within 0.1% of the cold solve's final bound
        reach = [int(np.argmax(r["bound_history"] <= target)) + 1
                 if np.any(r["bound_history"] <= target) else np.nan for r in (w, c)]
        rows.append((ws, cs, w.payload["iterations"], c.payload["iterations"], *reach,
                     w.value / c.value - 1))
    a = np.array(rows, dtype=float)
    print(f"mid-horizon re-solves ({len(states)} states on {paths} paths at T/5..4T/5), defaults:")
    print(f"  warm {a[:, 0].mean():.2f} s, {a[:, 2].mean():.0f} iterations per solve; cold "
          f"{a[:, 1].mean():.2f} s, {a[:, 3].mean():.0f} iterations; time ratio warm/cold "
          f"{a[:, 0].sum() / a[:, 1].sum():.2f}")
    print(f"  iterations to within 0.1% of the cold final bound: warm {np.nanmean(a[:, 4]):.0f} "
          f"(not reached on {int(np.isnan(a[:, 4]).sum())}), cold {np.nanmean(a[:, 5]):.0f}; "
          f"final warm vs cold bound: mean {100 * a[:, 6].mean():+.3f}%, "
          f"max {100 * a[:, 6].max():+.3f}%")
    b = np.array(budget)
    print(f"  warm re-solve on a budget of {BUDGET} iterations: {b[:, 0].mean():.2f} s per solve, "
          f"time ratio to the cold default solve {b[:, 0].sum() / b[:, 1].sum():.2f}; bound vs "
          f"cold: mean {100 * b[:, 2].mean():+.3f}%, max {100 * b[:, 2].max():+.3f}%")
    dpd, dpd_s = timed(lambda: get_solver("dpd").solve(net, dem))
    print(f"dpd: {dpd_s:.2f} s (value {dpd.value:.1f}, not a bound)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--paths", type=int, default=2, help="sample paths for re-solve states")
    args = parser.parse_args()
    for name in INSTANCES:
        bench(name, args.paths)


if __name__ == "__main__":
    main()
