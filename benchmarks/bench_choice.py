"""Benchmark: choice demand (issue 13): CDLP, the exact choice DP and the replay kernel.

Run by hand (not a test): ``python benchmarks/bench_choice.py``.

1. CDLP by column generation on parallel flights (Liu & van Ryzin 2008, alpha = 0.6, case 1),
   default pricing ('auto') and the Bront et al. pricing MIP. Goal: under 1 s.
2. Column generation against the LP over every offer set (``columns="all"``) on a generated
   12-product choice hub and spoke (2 spokes). Goal: column generation >= 10x faster.
3. CDLP on a generated 4-spoke choice hub and spoke (40 products, 40 segments). Goal: < 10 s.
4. The exact choice DP on parallel flights at alpha = 1 (31 x 51 x 41 states, 300 periods, 64
   offer sets), one thread. Goal: under 30 s.
5. The replay kernel with the bid-price offer rule on Example 0 of Bront et al. (2009): 3 legs,
   8 products, 5 segments, a customer every period. Customer arrivals per second of the numba
   kernel (compile excluded) against a lean Python loop of the same rule over the same
   customers (lists, one customer at a time); both must give the same revenues on the paths they
   share. Goal: >= 20 million arrivals per second.

The machine is shared and noisy: read the ratios, measured in one run, before absolute times.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:  # run as a script from anywhere: use this checkout's rmkit
    sys.path.insert(0, str(ROOT))


def timed(fn, repeat: int = 1):
    best, out = float("inf"), None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def bench_cdlp() -> None:
    from rmkit import get_solver
    from tests.choice_instances import parallel_flights

    net, dem = parallel_flights(0.6)
    for pricing in ("auto", "mip"):
        get_solver("cdlp", pricing=pricing).solve(net, dem)  # warm: imports, compile
        s, res = timed(lambda p=pricing: get_solver("cdlp", pricing=p).solve(net, dem), 3)
        print(f"1. CDLP parallel flights (pricing={pricing}): {s:.3f} s, value {res.value:,.2f} "
              f"(published 56,884.1), {res.payload['iterations']} master solves, "
              f"{res.payload['columns']} columns")


def bench_generation_vs_all() -> None:
    from rmkit import get_solver
    from rmkit.model.families import generate

    sc = generate("hub-spoke-choice", spokes=2, alpha=1.2, periods=200, seed=4)
    net, dem = sc.network, sc.demand
    get_solver("cdlp").solve(net, dem)
    gen_s, gen = timed(lambda: get_solver("cdlp").solve(net, dem), 3)
    mip_s, mip = timed(lambda: get_solver("cdlp", pricing="mip").solve(net, dem), 3)
    all_s, full = timed(lambda: get_solver("cdlp", columns="all").solve(net, dem))
    print(f"2. {net.n_products} products, {dem.n_segments} segments: column generation "
          f"{gen_s:.3f} s (MIP pricing {mip_s:.3f} s), every set {all_s:.3f} s "
          f"({full.payload['columns']} columns): ratio {all_s / gen_s:.0f}x "
          f"(MIP pricing {all_s / mip_s:.0f}x); values {gen.value:.6f} / {mip.value:.6f} / "
          f"{full.value:.6f}")


def bench_cdlp_large() -> None:
    from rmkit import get_solver
    from rmkit.model.families import generate

    sc = generate("hub-spoke-choice", spokes=4, alpha=1.2, periods=200, seed=1)
    net, dem = sc.network, sc.demand
    for pricing in ("auto", "mip"):
        s, res = timed(lambda p=pricing: get_solver("cdlp", pricing=p).solve(net, dem))
        print(f"3. CDLP 4-spoke choice hub and spoke ({net.n_products} products, "
              f"{dem.n_segments} segments, pricing={pricing}): {s:.3f} s, value {res.value:,.2f}")


def bench_exact() -> None:
    import numba

    from rmkit.methods.shared.choice_dp import solve_choice_dp
    from tests.choice_instances import parallel_flights

    numba.set_num_threads(1)
    small, _ = parallel_flights(0.2)
    solve_choice_dp(small, parallel_flights(0.2)[1])  # compile
    net, dem = parallel_flights(1.0)
    s, dp = timed(lambda: solve_choice_dp(net, dem))
    print(f"4. exact choice DP, parallel flights alpha = 1 ({net.state_space_size:,} states x "
          f"300 periods x 64 sets): {s:.2f} s, value {dp.value_at(net.capacities):,.2f}")


def lean_python_replay(net, dem, bid, customer, uniform) -> np.ndarray:
    """The bid-price offer rule and MNL purchase, one customer at a time, in plain Python."""
    legs_of = [list(np.flatnonzero(net.incidence[:, j])) for j in range(net.n_products)]
    fares = [float(f) for f in net.fares]
    bids = [float(b) for b in bid]
    sets = [list(c) for c in dem.consider]
    weights = [list(w) for w in dem.weights]
    v0 = [float(v) for v in dem.no_purchase]
    caps = [int(c) for c in net.capacities]
    out = np.zeros(customer.shape[0])
    for k, (row, urow) in enumerate(zip(customer.tolist(), uniform.tolist(), strict=True)):
        x = list(caps)
        revenue = 0.0
        for c, u in zip(row, urow, strict=True):
            if c < 0:
                continue
            offered, total = [], 0.0
            for j, w in zip(sets[c], weights[c], strict=True):
                legs = legs_of[j]
                if all(x[i] > 0 for i in legs) and fares[j] >= sum(bids[i] for i in legs) \
                        - 1e-9 * fares[j]:
                    offered.append((j, w))
                    total += w
            if not offered:
                continue
            target, cum, pick = u * (total + v0[c]), 0.0, -1
            for j, w in offered:
                cum += w
                if target < cum:
                    pick = j
                    break
            if pick < 0 and v0[c] == 0.0:
                pick = offered[-1][0]
            if pick >= 0:
                for i in legs_of[pick]:
                    x[i] -= 1
                revenue += fares[pick]
        out[k] = revenue
    return out


def bench_replay() -> None:
    from rmkit import get_solver
    from rmkit.controls import get_control
    from rmkit.kernels.replay import replay_paths
    from rmkit.workflows.simulate import grid_strides, kernel_network
    from tests.choice_instances import example_zero

    net, dem = example_zero(periods=30)
    res = get_solver("cdlp").solve(net, dem)
    ctrl = get_control("bid_price").arrays(res, net, net.capacities)
    n_paths = 400_000
    arr = dem.sample_arrivals(n_paths, 1)
    n_arrivals = int((arr.customer >= 0).sum())
    p, m, n = n_paths, net.n_legs, net.n_products

    def run(paths: int):
        book = (np.tile(net.capacities, (p, 1)).astype(np.int64), np.zeros(p),
                np.zeros((p, n), np.int64), np.zeros((p, dem.n_segments), np.int64),
                np.zeros((p, m, 0), np.int64), np.zeros(p, np.int64))
        replay_paths(ctrl, dem.kernel_data(), arr.customer, arr.uniform,
                     np.arange(paths, dtype=np.int64), dem.n_periods, False, kernel_network(net),
                     book, np.zeros((0, 0), np.int64), grid_strides(net.capacities))
        return book[1]

    run(10)  # compile
    kernel_s, revenue = timed(lambda: run(n_paths), 3)
    lean_paths = 20_000
    lean_s, lean = timed(lambda: lean_python_replay(net, dem, res["bid_price"],
                                                    arr.customer[:lean_paths],
                                                    arr.uniform[:lean_paths]))
    assert np.array_equal(lean, revenue[:lean_paths]), "the two replays disagree"
    lean_arrivals = int((arr.customer[:lean_paths] >= 0).sum())
    k_rate, l_rate = n_arrivals / kernel_s, lean_arrivals / lean_s
    print(f"5. replay, bid-price offer rule, {m} legs / {n} products / {dem.n_segments} segments: "
          f"kernel {k_rate / 1e6:.1f} M arrivals/s ({n_arrivals:,} in {kernel_s:.3f} s), lean "
          f"Python {l_rate / 1e6:.3f} M arrivals/s: ratio {k_rate / l_rate:.0f}x; same revenues")


if __name__ == "__main__":
    bench_cdlp()
    bench_generation_vs_all()
    bench_cdlp_large()
    bench_exact()
    bench_replay()
