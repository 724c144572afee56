"""Seeded choice-demand instances: the hub-and-spoke family with customers who choose.

Network as :func:`rmkit.model.generators.hub_and_spoke` (same legs, products and cheap fares for
the same seed). Every market (ordered pair of locations, weight uniform on (0, 1)) has two
segments, both considering the market's cheap and expensive products (MNL, Talluri & van Ryzin
2004, ch. 7):

* *price-sensitive*: weights (4, 0.4) for (cheap, expensive), no-purchase weight 1; with only the
  expensive product open, 2 in 7 of them buy it;
* *flexible*: weights (2, 3), no-purchase weight 0.5; with only the expensive product open, 6 in 7
  buy it.

Each weight is multiplied by a draw uniform on (0.8, 1.25), per segment and product. Arrivals:
``arrival`` customers per period, split over markets by weight; in the first half of the horizon
70% of a market's customers are price-sensitive, in the second half 30% (cheap demand books
early). Two rows of arrival probabilities, so CDLP has two epochs. Capacities follow the load
factor rule of the independent family, with the seat demand of everything offered.

>>> s = hub_and_spoke_choice(2, alpha=1.0, periods=40, seed=3)
>>> s.network.n_products, s.demand.n_segments
(12, 12)
>>> from rmkit.model.demand import load_factor
>>> round(load_factor(s.network, s.demand), 12)
1.0
"""

from __future__ import annotations

import numpy as np

from rmkit.model.choice import ChoiceDemand
from rmkit.model.network import Leg, Network
from rmkit.model.scenario import Scenario, ScenarioInfo, scenario_from_model

#: (cheap, expensive) weights and no-purchase weight of each segment kind.
PRICE_SENSITIVE = ((4.0, 0.4), 1.0)
FLEXIBLE = ((2.0, 3.0), 0.5)
#: Share of price-sensitive customers in the first and second half of the horizon.
EARLY_SHARE, LATE_SHARE = 0.7, 0.3


def hub_and_spoke_choice(
    spokes: int,
    *,
    alpha: float,
    kappa: float = 4.0,
    periods: int = 200,
    arrival: float = 1.0,
    fares: tuple[int, int] = (20, 100),
    seed: int = 0,
) -> Scenario:
    """A hub-and-spoke instance with MNL segments (see the module docstring).

    Parameters as :func:`rmkit.model.generators.hub_and_spoke`; ``arrival`` is the chance of a
    customer per period before the load-factor scaling (at most 1).
    """
    # imported here: rmkit.model.generators registers this family when it is imported
    from rmkit.model.generators import capacities_for_load_factor, hub_spoke_start

    owner = "hub_and_spoke_choice"
    hs = hub_spoke_start(owner, spokes, alpha, kappa, periods, arrival, fares, seed)
    n, alpha, kappa, t_count, arrival, (low, high), seed = hs.settings
    legs, products, pairs, rates = hs.legs, hs.products, hs.pairs, hs.rates
    jitter = hs.rng.uniform(0.8, 1.25, size=(len(pairs), 2, 2))

    early = np.arange(t_count) < t_count // 2
    share = np.where(early, EARLY_SHARE, LATE_SHARE)
    lam = np.empty((t_count, 2 * len(pairs)))
    lam[:, 0::2] = rates[None, :] * share[:, None]
    lam[:, 1::2] = rates[None, :] * (1.0 - share)[:, None]
    consider, weights, no_purchase, ids = [], [], [], []
    for k in range(len(pairs)):
        for s, (kind, (w, v0)) in enumerate((("price", PRICE_SENSITIVE), ("flex", FLEXIBLE))):
            consider.append([2 * k, 2 * k + 1])
            weights.append([round(float(w[c] * jitter[k, s, c]), 6) for c in range(2)])
            no_purchase.append(v0)
            ids.append(f"{products[2 * k].id[:-2]}-{kind}")

    shape = Network(legs=tuple(legs), products=tuple(products))
    raw = ChoiceDemand(lam, consider, weights, no_purchase, len(products), ids)
    caps, scaled = capacities_for_load_factor(shape.incidence, raw.sale_probabilities(), alpha,
                                              owner)
    lam = lam * (scaled.sum() / raw.sale_probabilities().sum())
    fitted = tuple(Leg(id=leg.id, capacity=int(c), name=leg.name)
                   for leg, c in zip(legs, caps, strict=True))
    name = f"hub-spoke-choice_{n}_{alpha:g}_{kappa:g}_{t_count}_s{seed}"
    network = Network(legs=fitted, products=tuple(products), name=name)
    demand = ChoiceDemand(lam, consider, weights, no_purchase, len(products), ids)
    settings = {"spokes": n, "alpha": alpha, "kappa": kappa, "periods": t_count,
                "arrival": arrival, "fares": [low, high], "seed": seed}
    text = ", ".join(f"{k}={v}" for k, v in settings.items())
    base = scenario_from_model(network, demand, name)
    info = ScenarioInfo(name=name, description=f"generated hub and spoke with choice: {text}")
    return Scenario(network=network, demand=demand, spec=base.spec.model_copy(
        update={"scenario": info}), source=name)
