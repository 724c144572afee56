"""Benchmark: the simulator's replay kernel against plain Python loops, on one core and two.

Run by hand (not a test): ``python benchmarks/bench_simulate.py [--shared DIR]``.

1. Static bid-price control on rm_600_8_1.6_8.0 (16 legs, 144 products, 600 periods): the DLP
   bid prices at the start, applied to every path. Requests per second of the simulator
   (through :func:`rmkit.workflows.simulate.replay`, which takes the branch-free loop of
   :mod:`rmkit.kernels.fixed_offer` here; compile excluded) on one thread and on two, against
   two plain Python loops of the same control over the same customers: a lean one written for
   Python (lists, one request at a time) and the kernel's own code run by the interpreter
   (``py_func``). Then the loops alone on a book allocated beforehand (``replay`` also
   allocates the book and groups the paths): the fixed-offer loop and the general loop of
   :mod:`rmkit.kernels.replay`, and the rule hand-written as one flat numba loop with
   branches. All must give the same revenues on the paths they share.
2. The exact policy on the bundled example (4 legs, 12 products, 300 periods, 211,575 states):
   the same comparison with the DP's stored decisions.

Goal (issue 15): the kernel at least 100x the lean Python loop; requests per second on one core
and on two. The machine is shared and noisy: read the ratios, measured in one run, before the
absolute times. Re-solves are measured in ``bench_resolves.py``.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:  # run as a script from anywhere: use this checkout's rmkit
    sys.path.insert(0, str(ROOT))

DEFAULT_SHARED = Path(__file__).resolve().parents[2] / "shared" / "benchmarks" / "hub-spoke"
INSTANCE = "rm_600_8_1.6_8.0"


def python_loop(network, customers: np.ndarray, accept) -> np.ndarray:
    """Per-path revenue of a control replayed one request at a time in plain Python."""
    legs_of = [list(np.flatnonzero(network.incidence[:, j])) for j in range(network.n_products)]
    fares = [float(f) for f in network.fares]
    caps = [int(c) for c in network.capacities]
    out = np.zeros(customers.shape[0])
    for k, row in enumerate(customers.tolist()):  # independent demand: type j asks for j
        x = list(caps)
        revenue = 0.0
        for t, j in enumerate(row):
            if j < 0:
                continue
            legs = legs_of[j]
            if all(x[i] > 0 for i in legs) and accept(t, j, x, legs, fares[j]):
                for i in legs:
                    x[i] -= 1
                revenue += fares[j]
        out[k] = revenue
    return out


def minimal_static_loop(customer, fares, leg_ptr, leg_list, product_bid, seats, revenue):
    """The static bid-price rule hand-written as one flat loop, no extension points: what a
    numba replay of this rule can attain (compiled in :func:`attainable_rate`)."""
    for k in range(customer.shape[0]):
        for t in range(customer.shape[1]):
            c = customer[k, t]
            if c < 0:
                continue
            ok = True
            for q in range(leg_ptr[c], leg_ptr[c + 1]):
                if seats[k, leg_list[q]] < 1:
                    ok = False
                    break
            if ok and fares[c] >= product_bid[c] - 1e-9 * fares[c]:
                for q in range(leg_ptr[c], leg_ptr[c + 1]):
                    seats[k, leg_list[q]] -= 1
                revenue[k] += fares[c]


def loop_rates(network, demand, result, arrivals, expected: np.ndarray) -> dict[str, float]:
    """Requests per second of the replay loops alone, on a book allocated and touched before the
    clock starts (best of three): the loop for a fixed offer that ``replay`` takes for static bid
    prices, and the general loop of the same control, each on one thread and two."""
    import numba

    from rmkit.controls import get_control
    from rmkit.kernels.fixed_offer import replay_fixed_offer_parallel
    from rmkit.kernels.replay import replay_paths_parallel
    from rmkit.workflows.simulate import FixedOfferLoop, kernel_network

    ctl = get_control("bid_price")
    arrays = ctl.arrays(result, network, network.capacities)
    p, n = arrivals.n_paths, network.n_products
    start = [np.tile(network.capacities, (p, 1)).astype(np.int64), np.zeros(p),
             np.zeros((p, n), np.int64), np.zeros((p, n), np.int64), np.zeros((p, 1), np.int64),
             np.zeros(p, np.int64)]
    book = [a.copy() for a in start]
    paths = np.arange(p, dtype=np.int64)
    fixed = FixedOfferLoop.start(network)
    open_ = np.zeros(n + 1, np.int64)
    open_[:-1] = ctl.fixed_offer(arrays, network)
    net, dem = kernel_network(network), demand.kernel_data()
    no_trace, strides = np.zeros((0, 0), np.int64), np.zeros(network.n_legs, np.int64)
    loops = {
        "fixed-offer loop": lambda: replay_fixed_offer_parallel(
            arrivals.customer, paths, demand.n_periods, open_, fixed.fare, fixed.legs, book[0],
            book[1], book[2], book[3], book[5]),
        "general loop": lambda: replay_paths_parallel(
            arrays, dem, arrivals.customer, arrivals.uniform, paths, demand.n_periods, False, net,
            tuple(book), no_trace, strides),
    }
    requests = int((arrivals.customer >= 0).sum())
    rates = {}
    before = numba.get_num_threads()
    try:
        for name, run in loops.items():
            for threads in (1, 2):
                numba.set_num_threads(min(threads, before))
                times = []
                for _ in range(4):  # the first compiles or loads the cache
                    for a, b in zip(book, start, strict=True):
                        a[...] = b
                    t0 = time.perf_counter()
                    run()
                    times.append(time.perf_counter() - t0)
                    assert np.array_equal(book[1], expected), f"{name} disagrees with replay"
                rates[f"{name}, {threads} thread{'s' if threads > 1 else ''}"] = (
                    requests / min(times[1:]))
    finally:
        numba.set_num_threads(before)
    return rates


def attainable_rate(network, arrivals, bid: np.ndarray, expected: np.ndarray) -> float:
    """Requests per second of :func:`minimal_static_loop` compiled (best of three)."""
    from numba import njit

    from rmkit.controls.bid_price import product_sums
    from rmkit.workflows.simulate import kernel_network

    loop = njit(minimal_static_loop)
    fares, leg_ptr, leg_list = kernel_network(network)
    sums = product_sums(bid, network)

    def run():
        seats = np.tile(network.capacities, (arrivals.n_paths, 1)).astype(np.int64)
        revenue = np.zeros(arrivals.n_paths)
        loop(arrivals.customer, fares, leg_ptr, leg_list, sums, seats, revenue)
        return revenue

    run()
    revenue, seconds = _best(run)
    assert np.allclose(revenue, expected), "the minimal loop and the kernel disagree"
    return int((arrivals.customer >= 0).sum()) / seconds


def static_bid_accept(bid: np.ndarray):
    prices = [float(b) for b in bid]

    def accept(t, j, x, legs, fare):
        return fare >= sum(prices[i] for i in legs) - 1e-9 * fare

    return accept


def exact_accept(bits: np.ndarray, strides: np.ndarray):
    s = [int(v) for v in strides]
    bits = bits.tolist()

    def accept(t, j, x, legs, fare):
        state = sum(xi * si for xi, si in zip(x, s, strict=True))
        return bool((bits[t][state][j >> 3] >> (j & 7)) & 1)

    return accept


def interpreted_replay(network, demand, policy, arrivals, seed):
    """:func:`rmkit.workflows.simulate.replay` with every compiled function of the replay kernel,
    the demand kernels and the controls swapped for its ``py_func``: the same control code, run
    by the Python interpreter."""
    import rmkit.controls
    import rmkit.kernels.independent_demand  # noqa: F401
    import rmkit.kernels.replay
    from rmkit.workflows.simulate import replay

    rmkit.controls.load_controls()
    swapped = [(m, name, fn) for key, m in list(sys.modules.items())
               if key.startswith(("rmkit.kernels.", "rmkit.controls.")) and m is not None
               for name, fn in list(vars(m).items()) if hasattr(fn, "py_func")]
    try:
        for m, name, fn in swapped:
            setattr(m, name, fn.py_func)
        return replay(network, demand, policy, arrivals, seed=seed, threads=1)
    finally:
        for m, name, fn in swapped:
            setattr(m, name, fn)


def head(arrivals, n: int):
    """The first n paths' customers."""
    from rmkit.model.demand import Arrivals

    return Arrivals(arrivals.customer[:n], arrivals.uniform[:n] if arrivals.uniform.size
                    else arrivals.uniform)


def _timed(fn):
    t0 = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t0


def _best(fn, repeats: int = 3):
    runs = [_timed(fn) for _ in range(repeats)]
    return runs[0][0], min(t for _, t in runs)


def compare_rates(label, network, demand, result, accept, kernel_paths, python_paths, seed,
                  minimal: bool = False):
    from rmkit.workflows.policies import FixedPolicy
    from rmkit.workflows.simulate import replay

    policy = FixedPolicy(result)
    arrivals = demand.sample_arrivals(kernel_paths, seed)
    requests = int((arrivals.customer >= 0).sum())
    for threads in (1, 2):  # compile or load the cache of both loops
        replay(network, demand, policy, head(arrivals, 300), seed=seed, threads=threads)
    # best of three: the machine is shared, and a neighbour's burst should not count as ours
    one, one_s = _best(lambda: replay(network, demand, policy, arrivals, seed=seed, threads=1))
    two, two_s = _best(lambda: replay(network, demand, policy, arrivals, seed=seed, threads=2))
    assert np.array_equal(one.revenue, two.revenue), "one and two threads disagree"
    few_customers = arrivals.customer[:python_paths]
    # the Python loops are timed best of three too, or a neighbour's burst would flatter the kernel
    lean, lean_s = _best(lambda: python_loop(network, few_customers, accept))
    few = max(python_paths // 10, 1)
    same, same_s = _best(lambda: interpreted_replay(
        network, demand, policy, head(arrivals, few), seed))
    assert np.allclose(lean, one.revenue[:python_paths]), "kernel and Python loop disagree"
    assert np.allclose(same.revenue, one.revenue[:few]), "kernel and its py_func disagree"
    one_rate, two_rate = requests / one_s, requests / two_s
    lean_rate = int((few_customers >= 0).sum()) / lean_s
    same_rate = int((arrivals.customer[:few] >= 0).sum()) / same_s
    print(f"{label}:\n  kernel, one thread {one_rate:,.0f} requests/s; two threads "
          f"{two_rate:,.0f} requests/s ({two_rate / one_rate:.2f}x; {kernel_paths} paths)"
          f"\n  lean pure-Python loop (lists) {lean_rate:,.0f} requests/s ({python_paths} paths): "
          f"one thread {one_rate / lean_rate:,.0f}x, two threads {two_rate / lean_rate:,.0f}x"
          f"\n  the kernel's own code interpreted (py_func) {same_rate:,.0f} requests/s ({few} "
          f"paths): one thread {one_rate / same_rate:,.0f}x")
    if minimal:
        for name, rate in loop_rates(network, demand, result, arrivals, one.revenue).items():
            print(f"  {name} alone, {rate:,.0f} requests/s: {rate / lean_rate:,.0f}x the lean "
                  "loop")
        best = attainable_rate(network, arrivals, np.asarray(result["bid_price"]), one.revenue)
        print(f"  the rule hand-written as one flat numba loop with branches {best:,.0f} "
              f"requests/s: replay on one thread reaches {one_rate / best:.0%} of it")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--shared", type=Path, default=DEFAULT_SHARED)
    args = parser.parse_args()

    import numba

    from rmkit import get_solver, load_scenario
    from rmkit.workflows.simulate import simulate
    print(f"numba threads available: {numba.get_num_threads()}")
    hub = load_scenario(args.shared / f"{INSTANCE}.txt.gz")
    dlp = get_solver("dlp").solve(hub.network, hub.demand)
    compare_rates(f"static bid prices ({INSTANCE})", hub.network, hub.demand, dlp,
                  static_bid_accept(dlp["bid_price"]), 20_000, 300, seed=1, minimal=True)

    example = load_scenario(ROOT / "rmkit" / "examples" / "tallowmere.toml")
    exact, exact_s = _timed(lambda: get_solver("exact").solve(example.network, example.demand))
    print(f"exact DP of the example: {exact_s:.1f} s, value {exact.value:,.2f}")
    compare_rates("exact policy (tallowmere example)", example.network, example.demand, exact,
                  exact_accept(exact.policy.bits, exact.policy.strides), 100_000, 2_000, seed=2)
    check = simulate(example.network, example.demand, exact, paths=20_000, seed=3)
    print(f"  exact policy mean {float(check.revenue_mean):,.2f} +- "
          f"{float(check.revenue_stderr):.2f} (DP value {exact.value:,.2f})")


if __name__ == "__main__":
    main()
