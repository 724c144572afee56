"""Choice-demand test instances from the literature, and an independent brute-force choice DP.

Data as published (re-keyed from /work/shared/reference/choice-examples.md): parallel flights of
Liu & van Ryzin (2008, MSOM 10(2):288-310, sec. 5) and "Example 0" of Bront, Mendez-Diaz &
Vulcano (2009, Operations Research 57(3):769-784, sec. 3). Products and legs are 0-based here.
"""

from __future__ import annotations

import itertools

import numpy as np

from rmkit import Network
from rmkit.model.choice import ChoiceDemand

#: The three no-purchase cases of the parallel-flights example.
NO_PURCHASE_CASES = ((1, 5, 5, 1), (1, 10, 5, 1), (5, 20, 10, 5))


def parallel_flights(alpha: float = 1.0, case: int = 0, periods: int = 300
                     ) -> tuple[Network, ChoiceDemand]:
    """Liu & van Ryzin (2008): three flights, six products, four segments, T = 300."""
    caps = [round(alpha * c) for c in (30, 50, 40)]
    net = Network.build(
        legs=[("morning", caps[0]), ("afternoon", caps[1]), ("evening", caps[2])],
        products=[("p1", 400.0, ["morning"]), ("p2", 800.0, ["morning"]),
                  ("p3", 500.0, ["afternoon"]), ("p4", 1000.0, ["afternoon"]),
                  ("p5", 300.0, ["evening"]), ("p6", 600.0, ["evening"])],
        name=f"parallel-flights-{alpha:g}-{case}",
    )
    lam = np.tile([0.10, 0.15, 0.20, 0.05], (periods, 1))
    consider = [[1, 3, 5], [0, 2, 4], [0, 1, 2, 3, 4, 5], [0, 1, 2, 3, 4, 5]]
    weights = [[5, 10, 1], [5, 1, 10], [10, 8, 6, 4, 3, 1], [8, 10, 4, 6, 1, 3]]
    return net, ChoiceDemand(lam, consider, weights, NO_PURCHASE_CASES[case], 6)


def example_zero(periods: int = 30) -> tuple[Network, ChoiceDemand]:
    """Bront, Mendez-Diaz & Vulcano (2009), sec. 3: legs A->B (10), A->C (5), B->C (5)."""
    net = Network.build(
        legs=[("AB", 10), ("AC", 5), ("BC", 5)],
        products=[("p1", 1200.0, ["AC"]), ("p2", 800.0, ["AB", "BC"]), ("p3", 500.0, ["AB"]),
                  ("p4", 500.0, ["BC"]), ("p5", 800.0, ["AC"]), ("p6", 500.0, ["AB", "BC"]),
                  ("p7", 300.0, ["AB"]), ("p8", 300.0, ["BC"])],
        name="example-zero",
    )
    lam = np.tile([0.15, 0.15, 0.20, 0.25, 0.25], (periods, 1))
    consider = [[0, 4], [0, 1], [4, 5], [2, 6], [3, 7]]
    weights = [[5, 8], [10, 6], [8, 5], [4, 8], [6, 8]]
    return net, ChoiceDemand(lam, consider, weights, [2, 5, 2, 2, 2], 8)


def tiny_choice(seed: int, n_legs: int = 2, max_capacity: int = 2, n_products: int = 4,
                n_periods: int = 5) -> tuple[Network, ChoiceDemand]:
    """A random tiny network with three overlapping segments (one with no-purchase weight 0)."""
    rng = np.random.default_rng(seed)
    legs = [(f"L{i}", int(rng.integers(1, max_capacity + 1))) for i in range(n_legs)]
    products = []
    for j in range(n_products):
        used = [j % n_legs] if j < n_legs or rng.random() < 0.5 else list(range(n_legs))
        products.append((f"P{j}", float(np.round(rng.uniform(20, 200), 2)),
                         [f"L{i}" for i in used]))
    net = Network.build(legs, products, name=f"tiny-choice-{seed}")
    sets = [sorted(rng.choice(n_products, size=int(rng.integers(1, n_products + 1)),
                              replace=False).tolist()) for _ in range(3)]
    weights = [rng.uniform(0.5, 4.0, size=len(c)).tolist() for c in sets]
    lam = rng.uniform(0.05, 0.3, size=(n_periods, 3))
    return net, ChoiceDemand(lam, sets, weights, [1.0, 0.0, 2.5], n_products)


def disjoint_choice(seed: int) -> tuple[Network, ChoiceDemand]:
    """A random network whose segments consider disjoint products (one with v_0 = 0)."""
    rng = np.random.default_rng(seed)
    net = Network.build([("A", 4), ("B", 3)],
                        [(f"p{j}", float(rng.integers(50, 300)), legs) for j, legs in
                         enumerate([["A"], ["A"], ["B"], ["A", "B"], ["B"], ["A", "B"]])])
    sets = [[0, 1], [2, 3], [4, 5]]
    weights = [rng.uniform(0.5, 5, 2).tolist() for _ in sets]
    lam = np.tile(rng.uniform(0.1, 0.3, 3), (20, 1))
    lam[10:] *= 0.5  # two epochs
    return net, ChoiceDemand(lam, sets, weights, [1.0, 0.0, 2.0], 6)


def brute_force_choice_values(network: Network, demand: ChoiceDemand) -> dict:
    """V_t(x) for every period and state by plain backward induction over dicts, enumerating every
    offer set of feasible products and computing MNL probabilities from scratch (written
    independently of rmkit's kernels, from Talluri & van Ryzin 2004, sec. 7.3)."""
    a, f = network.incidence, network.fares
    n, m = network.n_products, network.n_legs
    states = list(itertools.product(*[range(int(c) + 1) for c in network.capacities]))
    values = {demand.n_periods: {x: 0.0 for x in states}}
    for t in range(demand.n_periods - 1, -1, -1):
        nxt, cur = values[t + 1], {}
        for x in states:
            feasible = [j for j in range(n) if all(x[i] >= a[i, j] for i in range(m))]
            best = 0.0
            for r in range(1, len(feasible) + 1):
                for s in itertools.combinations(feasible, r):
                    gain = 0.0
                    for lam, c, w, v0 in zip(demand.arrival[t], demand.consider, demand.weights,
                                             demand.no_purchase, strict=True):
                        offered = [(j, wj) for j, wj in zip(c, w, strict=True) if j in s]
                        denom = v0 + sum(wj for _, wj in offered)
                        for j, wj in offered:
                            y = tuple(x[i] - a[i, j] for i in range(m))
                            gain += lam * wj / denom * (f[j] - nxt[x] + nxt[y])
                    best = max(best, gain)
            cur[x] = nxt[x] + best
        values[t] = cur
    return values
