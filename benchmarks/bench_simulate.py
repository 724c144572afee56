"""Benchmark: the simulator's replay kernel against a plain Python loop, and the LR protocol.

Run by hand (not a test): ``python benchmarks/bench_simulate.py [--shared DIR] [--skip-lr]
[--lr-iterations N]``.

1. Static bid-price control on rm_600_8_1.6_8.0 (16 legs, 144 products, 600 periods): the DLP
   bid prices at the start, applied to every path. Requests per second of the numba kernel
   (through :func:`rmkit.workflows.simulate.replay`, compile excluded) against two plain Python loops of the
   same control over the same streams: a lean one written for Python (lists, one request at a
   time) and the kernel's own code run by the interpreter (``py_func``). All must give the same
   revenues on the paths they share. The ratios are the figures to read.
2. The exact policy on the bundled example (4 legs, 12 products, 300 periods, 211,575 states):
   the same comparison with the DP's stored decisions.
3. The published protocol of Topaloglu (2009) with the LR policy on rm_600_8_1.6_8.0: bid prices
   recomputed at 5 equally spaced periods, 100 paths; wall time, solves and time in solves.

Goal (issue 7): at least 100x the plain Python loop; the LR protocol in under a minute. The
machine is shared and noisy: read the ratios, measured in one run, before the absolute times.
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

DEFAULT_SHARED = Path(__file__).resolve().parents[2] / "shared" / "benchmarks" / "hub-spoke"
INSTANCE = "rm_600_8_1.6_8.0"


def python_loop(network, streams, accept) -> np.ndarray:
    """Per-path revenue of a control replayed one request at a time in plain Python."""
    legs_of = [list(np.flatnonzero(network.incidence[:, j])) for j in range(network.n_products)]
    fares = [float(f) for f in network.fares]
    caps = [int(c) for c in network.capacities]
    out = np.zeros(streams.shape[0])
    for k, row in enumerate(streams.tolist()):
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


def static_bid_accept(bid: np.ndarray):
    prices = [float(b) for b in bid]

    def accept(t, j, x, legs, fare):
        return fare >= sum(prices[i] for i in legs) - 1e-9 * fare

    return accept


def exact_accept(bits: np.ndarray, strides: np.ndarray):
    s = [int(v) for v in strides]

    def accept(t, j, x, legs, fare):
        state = sum(xi * si for xi, si in zip(x, s, strict=True))
        return bool((int(bits[t, state, j >> 3]) >> (j & 7)) & 1)

    return accept


def interpreted_replay(network, demand, policy, streams, seed):
    """:func:`rmkit.workflows.simulate.replay` with every kernel function swapped for its ``py_func``: the
    same control code, run by the Python interpreter."""
    import rmkit.kernels.replay as kernels
    from rmkit.workflows.simulate import replay

    compiled = {k: v for k, v in vars(kernels).items() if hasattr(v, "py_func")}
    try:
        for name, fn in compiled.items():
            setattr(kernels, name, fn.py_func)
        return replay(network, demand, policy, streams, seed=seed)
    finally:
        for name, fn in compiled.items():
            setattr(kernels, name, fn)


def compare_rates(label, network, demand, result, accept, kernel_paths, python_paths, seed):
    from rmkit.workflows.policies import FixedPolicy
    from rmkit.workflows.simulate import replay

    policy = FixedPolicy(result)
    streams = demand.sample_streams(kernel_paths, seed)
    replay(network, demand, policy, streams[:2], seed=seed)  # compile / load the cache
    t0 = time.perf_counter()
    fast = replay(network, demand, policy, streams, seed=seed)
    kernel_s = time.perf_counter() - t0
    t0 = time.perf_counter()
    lean = python_loop(network, streams[:python_paths], accept)
    lean_s = time.perf_counter() - t0
    few = max(python_paths // 10, 1)
    t0 = time.perf_counter()
    same = interpreted_replay(network, demand, policy, streams[:few], seed)
    same_s = time.perf_counter() - t0
    assert np.allclose(lean, fast.revenue[:python_paths]), "kernel and Python loop disagree"
    assert np.allclose(same.revenue, fast.revenue[:few]), "kernel and its py_func disagree"
    kernel_rate = int((streams >= 0).sum()) / kernel_s
    lean_rate = int((streams[:python_paths] >= 0).sum()) / lean_s
    same_rate = int((streams[:few] >= 0).sum()) / same_s
    print(f"{label}:\n  kernel {kernel_rate:,.0f} requests/s ({kernel_paths} paths, {kernel_s:.3f} s)"
          f"\n  lean pure-Python loop (lists) {lean_rate:,.0f} requests/s ({python_paths} paths): "
          f"ratio {kernel_rate / lean_rate:,.0f}x"
          f"\n  the kernel's own code interpreted (py_func) {same_rate:,.0f} requests/s ({few} "
          f"paths): ratio {kernel_rate / same_rate:,.0f}x")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--shared", type=Path, default=DEFAULT_SHARED)
    parser.add_argument("--skip-lr", action="store_true", help="skip the LR protocol run")
    parser.add_argument("--only-lr", action="store_true", help="run the LR protocol alone")
    parser.add_argument(
        "--lr-iterations", type=int, default=None,
        help="re-solve LR warm-started with this iteration budget (default: LR's own stopping rule)",
    )
    args = parser.parse_args()

    from rmkit import load_scenario

    hub = load_scenario(args.shared / f"{INSTANCE}.txt.gz")
    net, dem = hub.network, hub.demand
    if not args.only_lr:
        kernel_rates(net, dem)
    if not args.skip_lr:
        lr_protocol(net, dem, args.lr_iterations)


def kernel_rates(net, dem) -> None:
    from rmkit import get_solver, load_scenario
    from rmkit.workflows.simulate import simulate

    dlp = get_solver("dlp").solve(net, dem)
    compare_rates(f"static bid prices ({INSTANCE})", net, dem, dlp,
                  static_bid_accept(dlp["bid_price"]), 20_000, 300, seed=1)

    example = load_scenario(ROOT / "rmkit" / "examples" / "tallowmere.toml")
    t0 = time.perf_counter()
    exact = get_solver("exact").solve(example.network, example.demand)
    print(f"exact DP of the example: {time.perf_counter() - t0:.1f} s, value {exact.value:,.2f}")
    compare_rates("exact policy (tallowmere example)", example.network, example.demand, exact,
                  exact_accept(exact.payload["decision_bits"], exact.payload["state_strides"]),
                  100_000, 2_000, seed=2)
    check = simulate(example.network, example.demand, exact, paths=20_000, seed=3)
    print(f"  exact policy mean {float(check.revenue_mean):,.2f} +- "
          f"{float(check.revenue_stderr):.2f} (DP value {exact.value:,.2f})")


def lr_protocol(net, dem, iterations: int | None = None) -> None:
    from rmkit.workflows.simulate import simulate

    # A budget re-solve starts from the period-0 multipliers (warm_start) and stops after
    # `iterations` subgradient steps: the bound is still valid, the bid prices near-final.
    params = None if iterations is None else {"warm_start": True, "max_iterations": iterations}
    label = "own stopping rule" if iterations is None else f"warm start, {iterations} iterations"

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        t0 = time.perf_counter()
        ds = simulate(net, dem, "lr", paths=100, seed=2009, resolve=5, params=params)
        wall = time.perf_counter() - t0
    print(f"LR protocol ({INSTANCE}, --resolve 5, 100 paths, {label}): {wall:.1f} s wall, "
          f"{ds.attrs['solves']} solves, {ds.attrs['solve_seconds']:.1f} s in solves; mean "
          f"{float(ds.revenue_mean):,.0f} +- {float(ds.revenue_stderr):,.0f}; solve statuses "
          f"{ds.attrs['solve_statuses']}; {len(caught)} warnings")


if __name__ == "__main__":
    main()
