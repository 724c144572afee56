"""Benchmark: the exact network DP kernel against plain numpy and a general MDP solver.

Run by hand (not a test): ``python benchmarks/bench_exact_dp.py [--repeats N] [--no-quantecon]``.

Cases (issue 3): (a) 3 legs, capacities 20/20/20, 6 products, T = 400; (b) 4 legs, capacities 15
each, 10 products, T = 400; (c) one leg, capacity 200, 4 products, T = 2000. Request chances are
the same in every period (so the general MDP solver's stationary backward induction applies).

For each case, in one process, best of ``--repeats`` wall-clock runs (the machine is shared and
noisy; the minimum is the least disturbed run), updates per second = states x products x periods
/ seconds:

* ``numpy``: a plain vectorised numpy version of the same recursion written here (whole grid per
  period, one array-slice update per product, values only), and ``numpy+dec`` which also keeps the
  decision of every product, period and state as a bool array (what the DP must hand the
  simulator).
* ``rmkit``: the kernel (:mod:`rmkit.kernels.network_dp`) called on prepared arrays, on one thread and
  as the two-thread pipeline, values only and with the packed decisions; ``rmkit solve`` the whole
  :func:`rmkit.methods.shared.network_dp.solve_network_dp` call (layout, allocation, kernel, packing).
* ``quantecon`` (optional): quantecon.markov.backward_induction on the state-action-pair model
  (every subset of products as an action) on (a) and (c); skipped on (b), where the model would
  need several GB.
* ``probe``: the attainable rate of the recursion's inner step, the same compare-multiply-add
  (``cur += p * max(f - (a - b), 0)``) swept over arrays that stay in the L1 cache, on one and two
  threads: the ceiling for the kernel on this machine.
* first and second run: a fresh process with an empty numba cache (compiles), then a second one
  with that cache (loads the compiled kernel), each timing its first solve of case (a).

Goals (issue 3): rmkit >= 8x numpy on (a) and (b), >= 60x on (c), >= 100x quantecon on (a).
"""

from __future__ import annotations

import argparse
import itertools
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:  # run as a script from anywhere: use this checkout's rmkit
    sys.path.insert(0, str(ROOT))

CASES = {"a": (3, 20, 6, 400), "b": (4, 15, 10, 400), "c": (1, 200, 4, 2000)}


def case_problem(name: str):
    """The benchmark network of a case: one local product per leg, the rest on 2 or 3 legs."""
    from rmkit import DemandModel, Network

    n_legs, cap, n_products, n_periods = CASES[name]
    rng = np.random.default_rng(2026)
    products = []
    for j in range(n_products):
        if j < n_legs or n_legs == 1:
            used = [j % n_legs]
        else:
            used = sorted(rng.choice(n_legs, size=int(rng.integers(2, min(3, n_legs) + 1)),
                                     replace=False).tolist())
        fare = float(np.round(rng.uniform(50, 300) * len(used), 2))
        products.append((f"P{j}", fare, [f"L{i}" for i in used]))
    weights = rng.uniform(0.2, 1.0, n_products)
    row = weights / weights.sum() * 0.8
    net = Network.build([(f"L{i}", cap) for i in range(n_legs)], products, name=f"case-{name}")
    return net, DemandModel(np.tile(row, (n_periods, 1)))


def best_of(fn, repeats: int, setup=None) -> float:
    best = float("inf")
    for _ in range(repeats):
        if setup is not None:
            setup()
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best


# ------------------------------------------------------------------ numpy reference
def numpy_dp(net, dem, keep_decisions: bool = False):
    """The recursion in plain numpy: whole grid per period, one slice update per product."""
    a = net.incidence
    shape = tuple(int(c) + 1 for c in net.capacities)
    hi = [tuple(slice(1, None) if a[i, j] else slice(None) for i in range(net.n_legs))
          for j in range(net.n_products)]
    lo = [tuple(slice(None, -1) if a[i, j] else slice(None) for i in range(net.n_legs))
          for j in range(net.n_products)]
    f = net.fares
    p = dem.probabilities
    v = np.zeros(shape)
    decisions = (np.zeros((dem.n_periods, net.n_products, *shape), dtype=bool)
                 if keep_decisions else None)
    for t in range(dem.n_periods - 1, -1, -1):
        w = v.copy()
        for j in range(net.n_products):
            gain = f[j] - (v[hi[j]] - v[lo[j]])
            w[hi[j]] += p[t, j] * np.maximum(gain, 0.0)
            if decisions is not None:
                decisions[t, j][hi[j]] = gain >= 0.0
        v = w
    return v, decisions


# ------------------------------------------------------------------ quantecon
def quantecon_ddp(net, row):
    """State-action-pair DiscreteDP of one period (actions: subsets of products that fit)."""
    import scipy.sparse as sp
    from quantecon.markov import DiscreteDP

    a = net.incidence
    caps = [range(int(c) + 1) for c in net.capacities]
    states = np.array(list(itertools.product(*caps)), dtype=np.int64)
    strides = np.array([int(np.prod([c + 1 for c in net.capacities[i + 1:]]))
                        for i in range(net.n_legs)])
    n = net.n_products
    s_ind, a_ind, rewards, rows, cols, vals = [], [], [], [], [], []
    n_rows = 0
    for act in range(2**n):
        chosen = [j for j in range(n) if act >> j & 1]
        fits = np.ones(len(states), dtype=bool)
        for j in chosen:
            fits &= np.all(states >= a[:, j], axis=1)
        k = np.flatnonzero(fits)
        pair = n_rows + np.arange(k.size)
        s_ind.append(k)
        a_ind.append(np.full(k.size, act))
        rewards.append(np.full(k.size, sum(row[j] * net.fares[j] for j in chosen)))
        for j in chosen:
            rows.append(pair)
            cols.append(k - int(a[:, j] @ strides))
            vals.append(np.full(k.size, row[j]))
        rows.append(pair)
        cols.append(k)
        vals.append(np.full(k.size, 1.0 - sum(row[j] for j in chosen)))
        n_rows += k.size
    q = sp.csr_matrix((np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
                      shape=(n_rows, len(states)))
    return DiscreteDP(np.concatenate(rewards), q, 1.0, np.concatenate(s_ind),
                      np.concatenate(a_ind))


# ------------------------------------------------------------------ attainable rate
def make_probe():
    """The inner step alone, over rows that stay in the L1 cache (one row pair per thread)."""
    from numba import njit, prange

    @njit
    def row_sweep(cur, nxt, p, f, reps):
        one = np.uint64(1)
        for _ in range(reps):
            for s in range(one, np.uint64(cur.size)):
                cur[s] += p * max(f - (nxt[s] - nxt[s - one]), 0.0)

    @njit(parallel=True)
    def sweep(cur, nxt, p, f, reps):
        for c in prange(cur.shape[0]):
            row_sweep(cur[c], nxt[c], p, f, reps)

    return row_sweep, sweep


def probe_rate(n_threads: int, repeats: int) -> float:
    row_sweep, sweep = make_probe()
    width, reps = 513, 20_000
    cur = np.zeros((n_threads, width))
    nxt = np.cumsum(np.full((n_threads, width), 0.5), axis=1)
    if n_threads == 1:
        def run():
            row_sweep(cur[0], nxt[0], 0.1, 1.0, reps)
    else:
        def run():
            sweep(cur, nxt, 0.1, 1.0, reps)
    run()
    seconds = best_of(run, repeats)
    return n_threads * (width - 1) * reps / seconds


# ------------------------------------------------------------------ first and second run
def first_call_seconds() -> None:
    """In a child process: time the first solve of case (a) (numba cache set by the parent)."""
    from rmkit.methods.shared.network_dp import solve_network_dp

    net, dem = case_problem("a")
    t = time.perf_counter()
    solve_network_dp(net, dem, parallel=False)
    first = time.perf_counter() - t
    t = time.perf_counter()
    solve_network_dp(net, dem, parallel=False)
    print(f"{first:.4f} {time.perf_counter() - t:.4f}")


def cold_and_cached() -> tuple[tuple[float, float], tuple[float, float]]:
    with tempfile.TemporaryDirectory() as cache:
        env = dict(os.environ, NUMBA_CACHE_DIR=cache)
        out = []
        for _ in range(2):
            done = subprocess.run([sys.executable, __file__, "--first-call"], env=env,
                                  capture_output=True, text=True, check=True)
            first, again = (float(v) for v in done.stdout.split())
            out.append((first, again))
    return out[0], out[1]


# ------------------------------------------------------------------ main
def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=7)
    parser.add_argument("--no-quantecon", action="store_true")
    parser.add_argument("--first-call", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.first_call:
        first_call_seconds()
        return

    import numba

    from rmkit.methods.shared.network_dp import prepare, solve_network_dp

    print(f"numba {numba.__version__}, numpy {np.__version__}, threads "
          f"{numba.get_num_threads()}, load average at start {os.getloadavg()[0]:.2f}")
    one = probe_rate(1, args.repeats)
    two = probe_rate(numba.get_num_threads(), args.repeats)
    print(f"probe (L1-resident inner step): {one:.3g} updates/s on 1 thread, {two:.3g} on "
          f"{numba.get_num_threads()}")
    rows = []
    for name in CASES:
        net, dem = case_problem(name)
        updates = net.state_space_size * net.n_products * dem.n_periods
        timing: dict[str, float] = {}
        numpy_reps = max(1, min(args.repeats, 3))
        timing["numpy"] = best_of(lambda net=net, dem=dem: numpy_dp(net, dem), numpy_reps)
        timing["numpy+dec"] = best_of(lambda net=net, dem=dem: numpy_dp(net, dem, True),
                                      numpy_reps)
        for keep in (False, True):
            for parallel in (False, True):
                bp = prepare(net, dem, 0, keep, np.zeros(0, dtype=np.int64), parallel=parallel)
                bp.run()  # compile or load from cache
                label = f"rmkit {'dec' if keep else 'val'} {'2thr' if parallel else '1thr'}"
                timing[label] = best_of(bp.run, args.repeats, setup=bp.reset)
        timing["rmkit solve"] = best_of(
            lambda net=net, dem=dem: solve_network_dp(net, dem), args.repeats)
        # same answer as the reference
        v_ref, _ = numpy_dp(net, dem)
        dp = solve_network_dp(net, dem)
        assert np.allclose(dp.values, v_ref.ravel(), rtol=1e-12, atol=1e-9)
        if not args.no_quantecon and name in ("a", "c"):
            from quantecon.markov import backward_induction

            t = time.perf_counter()
            ddp = quantecon_ddp(net, dem.probabilities[0])
            build = time.perf_counter() - t
            t = time.perf_counter()
            vs, _ = backward_induction(ddp, dem.n_periods)
            timing["quantecon"] = time.perf_counter() - t
            assert np.allclose(vs[0], dp.values, rtol=1e-9)
            print(f"({name}) quantecon model: {ddp.num_sa_pairs:,} state-action pairs, built in "
                  f"{build:.2f} s (not counted)")
        rows.append((name, net, dem, updates, timing))
        print(f"\ncase ({name}): {net.n_legs} legs, capacity {int(net.capacities[0])}, "
              f"{net.n_products} products, T = {dem.n_periods}, {net.state_space_size:,} states, "
              f"{updates:.3g} updates")
        for label, sec in timing.items():
            print(f"  {label:18s} {sec * 1e3:10.2f} ms  {updates / sec:10.3g} updates/s")
        best_val = min(timing["rmkit val 1thr"], timing["rmkit val 2thr"])
        best_dec = min(timing["rmkit dec 1thr"], timing["rmkit dec 2thr"])
        print(f"  ratios: numpy / rmkit values = {timing['numpy'] / best_val:.1f}x; "
              f"numpy / rmkit with decisions = {timing['numpy'] / best_dec:.1f}x; "
              f"numpy+dec / rmkit with decisions = {timing['numpy+dec'] / best_dec:.1f}x; "
              f"numpy / rmkit solve = {timing['numpy'] / timing['rmkit solve']:.1f}x")
        if "quantecon" in timing:
            print(f"  quantecon / rmkit with decisions = {timing['quantecon'] / best_dec:.0f}x")
        print(f"  kernel vs probe: values {updates / best_val / two:.0%}, with decisions "
              f"{updates / best_dec / two:.0%} of the {numba.get_num_threads()}-thread probe "
              f"rate; one thread: {updates / timing['rmkit val 1thr'] / one:.0%} (values)")
    (cold, cold_again), (cached, cached_again) = cold_and_cached()
    print(f"\nfirst run of case (a) in a fresh process: {cold:.2f} s with an empty numba cache "
          f"(compiling), {cached:.3f} s with the cache (second run); then {cached_again * 1e3:.1f}"
          f" ms per solve")
    print(f"load average at end {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
