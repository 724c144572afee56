"""Tiny problems for tests, with known optima where they have one.

These are test fixtures, not demo data; their optima are checked against independent
computations (closed forms, brute-force backward induction, general MDP solvers) in the tests.
"""

from __future__ import annotations

import itertools

import numpy as np

from rmkit import DemandModel, Network


def one_seat_problem() -> tuple[Network, DemandModel]:
    """1 seat, 1 period, fare 10, request chance 0.3: optimum 0.3 * 10 = 3.0 (by hand)."""
    net = Network.build(legs=[("L", 1)], products=[("P", 10.0, ["L"])])
    return net, DemandModel(np.array([[0.3]]))


def random_problem(
    seed: int,
    n_legs: int = 2,
    max_capacity: int = 3,
    n_products: int = 4,
    n_periods: int = 6,
    total_probability: float = 0.8,
) -> tuple[Network, DemandModel]:
    """A random small network; every leg is used by at least one single-leg product."""
    rng = np.random.default_rng(seed)
    n_products = max(n_products, n_legs)
    legs = [(f"L{i}", int(rng.integers(1, max_capacity + 1))) for i in range(n_legs)]
    products = []
    for j in range(n_products):
        if j < n_legs:
            used = [j]
        else:
            k = int(rng.integers(1, n_legs + 1))
            used = sorted(rng.choice(n_legs, size=k, replace=False).tolist())
        fare = float(np.round(rng.uniform(20, 200) * len(used), 2))
        products.append((f"P{j}", fare, [f"L{i}" for i in used]))
    raw = rng.uniform(0.1, 1.0, size=(n_periods, n_products))
    p = raw / raw.sum(axis=1, keepdims=True) * total_probability
    return Network.build(legs, products, name=f"random-{seed}"), DemandModel(p)


def small_problem() -> tuple[Network, DemandModel]:
    """3 legs, 6 products (two connecting), 12 periods: small enough for every method."""
    return random_problem(7, n_legs=3, max_capacity=3, n_products=6, n_periods=12)


def brute_force_values(network: Network, demand: DemandModel) -> dict:
    """V_t(x) for every period t (0..T) and state x by plain backward induction over dicts.

    Written independently of rmkit's kernels, straight from the recursion of Talluri & van Ryzin
    (2004), section 3.1: V_T = 0, V_t(x) = sum_j p_tj max(V_{t+1}(x), f_j + V_{t+1}(x - A_j))
    + (1 - sum_j p_tj) V_{t+1}(x), accepting only when x - A_j >= 0.
    """
    a = network.incidence
    f = network.fares
    p = demand.probabilities
    caps = [range(int(c) + 1) for c in network.capacities]
    states = list(itertools.product(*caps))
    values = {demand.n_periods: {x: 0.0 for x in states}}
    for t in range(demand.n_periods - 1, -1, -1):
        nxt = values[t + 1]
        cur = {}
        for x in states:
            v = (1.0 - p[t].sum()) * nxt[x]
            for j in range(network.n_products):
                y = tuple(int(xi - ai) for xi, ai in zip(x, a[:, j], strict=True))
                if min(y) >= 0:
                    v += p[t, j] * max(nxt[x], f[j] + nxt[y])
                else:
                    v += p[t, j] * nxt[x]
            cur[x] = v
        values[t] = cur
    return values
