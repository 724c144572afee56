"""Benchmark: warm HiGHS re-solves of the network LP, and the perfect-hindsight bound.

Run by hand (not a test): ``python benchmarks/bench_network_programs.py [--shared DIR]``.

1. DLP along a booking path on the 8-spoke instances (16 legs, 144 products): one sampled request
   stream is booked with DLP bid prices re-solved in every period, so each re-solve sees the
   capacity and demand to come of the next state. At each state, in alternation (so machine noise
   hits all alike): scipy.optimize.linprog(method="highs") solved cold, a fresh highspy model
   solved cold, and the warm :class:`rmkit.methods.shared.network_lp.NetworkLP` re-solve. Reported: median
   microseconds per solve, the cold/warm ratios, and the median simplex iterations of the warm
   re-solves. The same again for random capacity changes (not a path).
2. The ``ph`` bound with K = 1000 samples on rm_600_8_1.6_8.0: the one-off load of the sampling
   kernel (numba import and cache), then seconds per call (first call, best and median of
   repeats) and LP solves per second.

Goal (issue 5): warm re-solves along a booking path at least 10x faster than cold scipy linprog
(median), and the PH bound with 1000 samples in under 2 seconds. The machine is shared and noisy:
read the ratios, measured in one run, before the absolute times.
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
PATH_INSTANCES = ("rm_200_8_1.6_8.0", "rm_600_8_1.6_8.0")
PH_INSTANCE = "rm_600_8_1.6_8.0"


def _scipy_cold(net, x, d) -> float:
    from scipy.optimize import linprog

    res = linprog(-net.fares, A_ub=net.incidence, b_ub=x,
                  bounds=np.column_stack([np.zeros(d.size), d]), method="highs")
    assert res.status == 0, res.message
    return -res.fun


def booking_path_states(net, dem, seed: int) -> list[tuple[int, np.ndarray]]:
    """States (period, seats left) met by one request stream under re-solved DLP bid prices."""
    from rmkit.methods.shared.network_lp import NetworkLP

    model = NetworkLP(net)
    stream = dem.sample_streams(1, seed)[0]
    x = net.capacities.astype(np.int64).copy()
    states = []
    for t, j in enumerate(stream):
        states.append((t, x.copy()))
        if j < 0:
            continue
        legs = net.incidence[:, j] > 0
        if np.all(x[legs] >= 1):
            pi = model.solve(x, dem.demand_to_come(t)).bid_price
            if net.fares[j] >= pi[legs].sum():
                x[legs] -= 1
    return states


def time_resolves(net, dem, states, passes: int) -> dict[str, float]:
    """Medians over ``passes`` walks through ``states``, each with a new warm model."""
    from rmkit.methods.shared.network_lp import NetworkLP

    t_scipy, t_fresh, t_warm, iters = [], [], [], []
    for _ in range(passes):
        warm_model = NetworkLP(net)
        warm_model.solve(*_state_bounds(dem, states[0]))  # the first solve is not a re-solve
        _walk(net, dem, states, warm_model, t_scipy, t_fresh, t_warm, iters)
    us = 1e6
    return {
        "n": len(t_warm),
        "scipy_cold_us": float(np.median(t_scipy)) * us,
        "highspy_fresh_us": float(np.median(t_fresh)) * us,
        "warm_us": float(np.median(t_warm)) * us,
        "ratio_scipy_warm": float(np.median(t_scipy) / np.median(t_warm)),
        "ratio_fresh_warm": float(np.median(t_fresh) / np.median(t_warm)),
        "warm_iterations_median": float(np.median(iters)),
    }


def _walk(net, dem, states, warm_model, t_scipy, t_fresh, t_warm, iters) -> None:
    from rmkit.methods.shared.network_lp import NetworkLP

    for state in states:
        x, d = _state_bounds(dem, state)
        t0 = time.perf_counter()
        sol = warm_model.solve(x, d)
        t1 = time.perf_counter()
        ref = _scipy_cold(net, x, d)
        t2 = time.perf_counter()
        NetworkLP(net).solve(x, d)
        t3 = time.perf_counter()
        assert abs(sol.value - ref) <= 1e-6 * max(1.0, abs(ref)), (sol.value, ref)
        t_warm.append(t1 - t0)
        t_scipy.append(t2 - t1)
        t_fresh.append(t3 - t2)
        iters.append(sol.iterations)


def _state_bounds(dem, state) -> tuple[np.ndarray, np.ndarray]:
    t, x = state
    return x.astype(np.float64), dem.demand_to_come(t)


def random_states(net, dem, count: int, seed: int) -> list[tuple[int, np.ndarray]]:
    rng = np.random.default_rng(seed)
    return [
        (int(rng.integers(0, dem.n_periods)), rng.integers(0, net.capacities + 1))
        for _ in range(count)
    ]


def time_ph(net, dem, repeats: int) -> dict[str, float]:
    from rmkit import get_solver

    solver = get_solver("ph", samples=1000)
    t0 = time.perf_counter()
    dem.sample_demand_to_come(1, 0)  # one-off: numba import and compiled-kernel cache load
    load_s = time.perf_counter() - t0
    t0 = time.perf_counter()
    first = solver.solve(net, dem, seed=1)
    first_s = time.perf_counter() - t0
    times = []
    for r in range(repeats):
        t0 = time.perf_counter()
        res = solver.solve(net, dem, seed=1 + r)
        times.append(time.perf_counter() - t0)
    best = min(times)
    return {
        "value": first.value,
        "stderr": float(first.stderr or 0.0),
        "kernel_load_s": load_s,
        "first_call_s": first_s,
        "best_s": best,
        "median_s": float(np.median(times)),
        "solves_per_s": 1000 / best,
        "last_value": res.value,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--shared", type=Path, default=DEFAULT_SHARED)
    parser.add_argument("--random", type=int, default=300, help="random re-solves per instance")
    parser.add_argument("--repeats", type=int, default=5, help="repeats of the PH bound")
    parser.add_argument("--passes", type=int, default=3, help="walks through each state list")
    args = parser.parse_args()

    from rmkit.model.scenario import load_scenario

    t_import = time.perf_counter()
    ph_scen = load_scenario(args.shared / f"{PH_INSTANCE}.txt.gz")
    print(f"read {PH_INSTANCE}: {time.perf_counter() - t_import:.2f} s")
    ph = time_ph(ph_scen.network, ph_scen.demand, args.repeats)
    print(
        f"PH bound, K=1000, {PH_INSTANCE}: value {ph['value']:.1f} +- {ph['stderr']:.1f}; "
        f"one-off sampling-kernel load {ph['kernel_load_s']:.3f} s, then first call "
        f"{ph['first_call_s']:.3f} s, best of {args.repeats} "
        f"{ph['best_s']:.3f} s, median {ph['median_s']:.3f} s, {ph['solves_per_s']:.0f} LP "
        f"solves/s  (goal < 2 s)"
    )
    for name in PATH_INSTANCES:
        scen = load_scenario(args.shared / f"{name}.txt.gz")
        net, dem = scen.network, scen.demand
        for label, states in (
            ("booking path", booking_path_states(net, dem, seed=7)),
            ("random states", random_states(net, dem, args.random, seed=7)),
        ):
            r = time_resolves(net, dem, states, args.passes)
            print(
                f"DLP {name} ({net.n_legs} legs, {net.n_products} products), {label}, "
                f"{r['n']} re-solves: median us scipy cold {r['scipy_cold_us']:.0f}, highspy fresh "
                f"{r['highspy_fresh_us']:.0f}, warm {r['warm_us']:.0f}; ratio scipy/warm "
                f"{r['ratio_scipy_warm']:.1f}x, fresh/warm {r['ratio_fresh_warm']:.1f}x; warm "
                f"simplex iterations (median) {r['warm_iterations_median']:.0f}"
            )


if __name__ == "__main__":
    main()
