"""Instance generators: the hub-and-spoke family of the public benchmark, and line networks.

Both generators are seeded (numpy PCG64), return a :class:`~rmkit.model.scenario.Scenario` and are
written to TOML with :func:`~rmkit.model.scenario.save_scenario`; the same settings and seed give the
same file. Places get invented names.

Hub and spoke (the family of Topaloglu 2009, "Using Lagrangian relaxation to compute
capacity-dependent bid prices in network revenue management", Operations Research 57(3))
----------------------------------------------------------------------------------------
One hub (location 0) and N spokes (1..N). Legs: every spoke to the hub, then the hub to every
spoke (2N legs, the benchmark's order). Products: every ordered pair (o, d) of the N+1 locations
in a cheap (class 0) and an expensive (class 1) fare, in (o, d, class) order: 2N(N+1) products;
a spoke-to-spoke product uses o->hub and hub->d. The cheap fare of a pair is a whole number drawn
uniformly from ``fares`` (the same in both directions); the expensive fare is kappa times it.

Demand, in the benchmark's shape: pair (o, d) has a request probability ``lambda_od`` in every
period (``sum lambda = arrival``, weights uniform on (0, 1)); its requests are all cheap until a
switch period ``s_od`` drawn uniformly from ``[T/2, 2T/3]``, after which the expensive share rises
as ``1 - ((T - t) / (T - s_od + 1))**2`` and nears 1 at the end. So cheap demand comes earlier
than expensive demand. (This rising share is our own curve; the published files follow a curve of
the same shape that they do not state.)

Capacity, from the load factor ``alpha = sum_i E[seat requests on leg i] / sum_i c_i``: the total
capacity is ``C = floor(D / alpha)`` for expected seat demand D, every request probability is then
scaled by ``alpha C / D <= 1`` (less than one seat's worth of demand) so that the load factor is
exactly alpha, and C is split over the legs in proportion to their demand by largest remainders.

Line (a bus or train route)
---------------------------
Stations 0..k along k legs (leg i runs from station i to i+1); every origin-destination pair
``o < d`` is sold in ``classes`` fare classes: class 0 costs the sum of the legs' base fares (drawn
from ``fares``) times ``taper ** (d - o - 1)`` (longer trips cost less per leg, common practice),
class c costs ``ratio ** c`` times class 0. Pair weights are uniform on (0, 1); within a pair,
class c gets demand in proportion to ``ratio ** -c`` and books along a beta curve that moves from
early (cheapest, Beta(2, 4)) to late (dearest, Beta(4, 2)); ``arrival`` is the expected number of
requests per period. Capacity follows the same load-factor rule as the hub and spoke family.

>>> s = hub_and_spoke(2, alpha=1.2, kappa=4.0, periods=30, seed=1)
>>> s.network.n_legs, s.network.n_products
(4, 12)
>>> from rmkit.model.demand import load_factor
>>> round(load_factor(s.network, s.demand), 12)
1.2
"""

from __future__ import annotations

import math
from typing import Any, NamedTuple

import numpy as np

from rmkit.errors import InputError, param_error
from rmkit.model.independent import IndependentDemand
from rmkit.model.network import Leg, Network, Product
from rmkit.model.scenario import Scenario, ScenarioInfo, scenario_from_model

#: Invented place names (hub first); generators fall back to numbered outposts past the list.
PLACES = (
    "Brannoch", "Vellimar", "Cotterwick", "Saltreave", "Dunmarrow", "Pellistry", "Okkerby",
    "Wrenhallow", "Maddelin Fjord", "Thistlecombe", "Yarrowgate", "Fennimere", "Calderquay",
    "Ravensmoor Halt", "Quarrendon", "Lissothe", "Emberwold", "Gorsefield", "Nettlecaster",
    "Ashenvale Cross", "Morrowdeep", "Sorrelby", "Kindlewater", "Hobbenstow", "Tarnwick",
)


def place_name(k: int) -> str:
    return PLACES[k] if k < len(PLACES) else f"Outpost {k}"


def place_id(k: int) -> str:
    return place_name(k).lower().replace(" ", "")


# ------------------------------------------------------------------ checks
def _whole(owner: str, name: str, value: Any, low: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < low:
        raise param_error(owner, name, f"a whole number >= {low}", value)
    return int(value)


def _positive(owner: str, name: str, value: Any, low: float = 0.0, strict: bool = True) -> float:
    ok = isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)
    ok = ok and math.isfinite(float(value)) and (value > low if strict else value >= low)
    if not ok:
        rule = f"a finite number {'>' if strict else '>='} {low:g}"
        raise param_error(owner, name, rule, value)
    return float(value)


def _fare_range(owner: str, fares: Any) -> tuple[int, int]:
    ok = (
        isinstance(fares, (tuple, list))
        and len(fares) == 2
        and all(isinstance(v, (int, np.integer)) and not isinstance(v, bool) for v in fares)
        and 1 <= fares[0] <= fares[1]
    )
    if not ok:
        raise param_error(owner, "fares", "a pair of whole numbers [low, high] with 1 <= low <= high",
                          fares)
    return int(fares[0]), int(fares[1])


# ------------------------------------------------------------------ capacity from alpha
def capacities_for_load_factor(
    incidence: np.ndarray, probabilities: np.ndarray, alpha: float, where: str
) -> tuple[np.ndarray, np.ndarray]:
    """Leg capacities and rescaled probabilities whose load factor is exactly ``alpha``.

    Returns ``(capacities, probabilities * alpha C / D)`` with ``C = floor(D / alpha)`` seats in
    total, split over legs in proportion to their expected seat demand by largest remainders.
    """
    leg_demand = incidence @ probabilities.sum(axis=0)
    total = float(leg_demand.sum())
    seats = math.floor(total / alpha + 1e-9)
    if seats < 1:
        raise InputError(
            f"{where}: expected seat demand {total:.3g} gives less than one seat at alpha = "
            f"{alpha:g}; use more periods, a higher arrival rate or a lower alpha"
        )
    scale = alpha * seats / total
    share = leg_demand * scale / alpha  # sums to `seats`
    caps = np.floor(share + 1e-9).astype(np.int64)
    short = seats - int(caps.sum())
    if short > 0:
        order = np.argsort(-(share - caps), kind="stable")
        caps[order[:short]] += 1
    return caps, probabilities * scale


def _check_size(owner: str, field: str, n_legs: int, n_products: int, n_periods: int) -> None:
    """Refuse before building an instance whose incidence and request tables would not fit."""
    from rmkit.limits import check_memory

    check_memory(8 * (n_legs * n_products + 3 * n_periods * n_products),
                 f"{n_legs:,} legs x {n_products:,} products x {n_periods:,} periods",
                 f"{owner}: {field}", advice="generate a smaller instance")


def _fares_and_rng(owner: str, fares: Any, seed: Any) -> tuple[tuple[int, int], int, np.random.Generator]:
    seed = _whole(owner, "seed", seed, 0)
    return _fare_range(owner, fares), seed, np.random.Generator(np.random.PCG64(seed))


def _finish(
    owner: str, legs: list[Leg], products: list[Product], p: np.ndarray, alpha: float, name: str,
    description: str,
) -> Scenario:
    """Fit capacities to alpha, then build the network, demand and scenario (with its TOML spec)."""
    shape = Network(legs=tuple(legs), products=tuple(products))
    caps, p = capacities_for_load_factor(shape.incidence, p, alpha, owner)
    fitted = tuple(Leg(id=leg.id, capacity=int(c), name=leg.name)
                   for leg, c in zip(legs, caps, strict=True))
    network = Network(legs=fitted, products=tuple(products), name=name)
    demand = IndependentDemand(p)
    base = scenario_from_model(network, demand, name)
    spec = base.spec.model_copy(update={"scenario": ScenarioInfo(name=name, description=description)})
    return Scenario(network=network, demand=demand, spec=spec, source=name)


def _settings_text(settings: dict[str, Any]) -> str:
    return ", ".join(f"{k}={v}" for k, v in settings.items())


# ------------------------------------------------------------------ hub and spoke
def hub_spoke_shape(n: int, kappa: float, low: int, high: int, rng: np.random.Generator
                    ) -> tuple[list[Leg], list[Product], list[tuple[int, int]]]:
    """Legs, products and ordered location pairs of the hub-and-spoke family (module docstring);
    draws the cheap fares, the first numbers of ``rng``."""
    places = [place_id(k) for k in range(n + 1)]
    legs = [Leg(id=f"{places[k]}-{places[0]}", capacity=0, name=f"{place_name(k)} to {place_name(0)}")
            for k in range(1, n + 1)]
    legs += [Leg(id=f"{places[0]}-{places[k]}", capacity=0, name=f"{place_name(0)} to {place_name(k)}")
             for k in range(1, n + 1)]
    pairs = [(o, d) for o in range(n + 1) for d in range(n + 1) if o != d]
    cheap = {}
    for o, d in pairs:  # one draw per unordered pair, in a fixed order
        if (d, o) not in cheap:
            cheap[(o, d)] = float(rng.integers(low, high + 1))
        else:
            cheap[(o, d)] = cheap[(d, o)]
    products = []
    for o, d in pairs:
        path = (f"{places[o]}-{places[d]}",) if 0 in (o, d) else (
            f"{places[o]}-{places[0]}", f"{places[0]}-{places[d]}")
        for c, fare in ((0, cheap[(o, d)]), (1, kappa * cheap[(o, d)])):
            products.append(Product(
                id=f"{places[o]}-{places[d]}-{c}", fare=fare, legs=path,
                name=f"{place_name(o)} to {place_name(d)} {'cheap' if c == 0 else 'expensive'}",
                fare_class=str(c), origin=place_name(o), destination=place_name(d),
            ))
    return legs, products, pairs


class HubSpokeStart(NamedTuple):
    """Checked settings of a hub-and-spoke generator, its shape, and each pair's arrival rate."""

    settings: tuple[int, float, float, int, float, tuple[int, int], int]
    rng: np.random.Generator
    legs: list[Leg]
    products: list[Product]
    pairs: list[tuple[int, int]]
    rates: np.ndarray


def hub_spoke_start(owner: str, spokes: Any, alpha: Any, kappa: Any, periods: Any, arrival: Any,
                    fares: Any, seed: Any) -> HubSpokeStart:
    """Check the family's settings, draw the cheap fares and the pair weights (in that order):
    pair (o, d) gets ``arrival * weight / sum of weights`` customers per period."""
    n = _whole(owner, "spokes", spokes, 1)
    alpha = _positive(owner, "alpha", alpha)
    kappa = _positive(owner, "kappa", kappa, 1.0, strict=False)
    t_count = _whole(owner, "periods", periods, 2)
    _check_size(owner, "spokes, periods", 2 * n, 2 * n * (n + 1), t_count)
    arrival = _positive(owner, "arrival", arrival)
    if arrival > 1.0:
        raise param_error(owner, "arrival", "a request probability in (0, 1]", arrival)
    (low, high), seed, rng = _fares_and_rng(owner, fares, seed)
    legs, products, pairs = hub_spoke_shape(n, kappa, low, high, rng)
    weights = rng.random(len(pairs))
    rates = arrival * weights / weights.sum()
    return HubSpokeStart((n, alpha, kappa, t_count, arrival, (low, high), seed), rng, legs,
                         products, pairs, rates)


def hub_and_spoke(
    spokes: int,
    *,
    alpha: float,
    kappa: float = 4.0,
    periods: int = 200,
    arrival: float = 1.0,
    fares: tuple[int, int] = (20, 100),
    seed: int = 0,
) -> Scenario:
    """A hub-and-spoke instance of the public benchmark's family (see the module docstring).

    Parameters
    ----------
    spokes
        N, the number of spokes (>= 1): 2N legs and 2N(N+1) products.
    alpha
        Load factor: total expected seat requests over total capacity (met exactly).
    kappa
        Expensive fare over cheap fare (>= 1).
    periods
        T, the number of booking periods.
    arrival
        Request probability per period before the load-factor scaling (the public files use 1.0
        at T = 200 and 0.5 at T = 600).
    fares
        ``(low, high)`` range of the whole-number cheap fares.
    seed
        Seed of the numpy PCG64 generator.
    """
    owner = "hub_and_spoke"
    hs = hub_spoke_start(owner, spokes, alpha, kappa, periods, arrival, fares, seed)
    n, alpha, kappa, t_count, arrival, (low, high), seed = hs.settings
    rng, legs, products, pairs, rates = hs.rng, hs.legs, hs.products, hs.pairs, hs.rates
    switch = rng.integers(t_count // 2, (2 * t_count) // 3 + 1, size=len(pairs))

    t = np.arange(t_count)[:, None]
    rising = 1.0 - ((t_count - t) / (t_count - switch[None, :] + 1.0)) ** 2
    dear_share = np.where(t >= switch[None, :], np.clip(rising, 0.0, 1.0), 0.0)
    p = np.empty((t_count, 2 * len(pairs)))
    p[:, 0::2] = rates[None, :] * (1.0 - dear_share)
    p[:, 1::2] = rates[None, :] * dear_share

    settings = {"spokes": n, "alpha": alpha, "kappa": kappa, "periods": t_count,
                "arrival": arrival, "fares": [low, high], "seed": seed}
    return _finish(owner, legs, products, p, alpha,
                   f"hub-spoke_{n}_{alpha:g}_{kappa:g}_{t_count}_s{seed}",
                   f"generated hub and spoke: {_settings_text(settings)}")


# ------------------------------------------------------------------ line
def line_network(
    legs: int,
    *,
    alpha: float,
    classes: int = 2,
    ratio: float = 2.0,
    periods: int = 100,
    arrival: float = 0.5,
    fares: tuple[int, int] = (20, 60),
    taper: float = 0.85,
    seed: int = 0,
) -> Scenario:
    """A line (bus or train) route with every origin-destination product (module docstring).

    Parameters
    ----------
    legs
        k, the number of legs (k + 1 stations, k(k+1)/2 origin-destination pairs).
    alpha
        Load factor: total expected seat requests over total capacity (met exactly).
    classes
        Fare classes per pair (>= 1); class 0 is the cheapest.
    ratio
        Fare of class c+1 over class c (>= 1).
    periods
        T, the number of booking periods.
    arrival
        Expected requests per period before the load-factor scaling.
    fares
        ``(low, high)`` range of the whole-number base fare of each leg.
    taper
        Per-leg discount of longer trips, in (0, 1].
    seed
        Seed of the numpy PCG64 generator.
    """
    owner = "line_network"
    k = _whole(owner, "legs", legs, 1)
    alpha = _positive(owner, "alpha", alpha)
    m = _whole(owner, "classes", classes, 1)
    ratio = _positive(owner, "ratio", ratio, 1.0, strict=False)
    t_count = _whole(owner, "periods", periods, 1)
    _check_size(owner, "legs, classes, periods", k, k * (k + 1) // 2 * m, t_count)
    arrival = _positive(owner, "arrival", arrival)
    taper = _positive(owner, "taper", taper)
    if taper > 1.0:
        raise param_error(owner, "taper", "a number in (0, 1]", taper)
    (low, high), seed, rng = _fares_and_rng(owner, fares, seed)

    places = [place_id(s) for s in range(k + 1)]
    base = rng.integers(low, high + 1, size=k).astype(np.float64)
    leg_list = [Leg(id=f"{places[i]}-{places[i + 1]}", capacity=0,
                    name=f"{place_name(i)} to {place_name(i + 1)}") for i in range(k)]
    pairs = [(o, d) for o in range(k + 1) for d in range(o + 1, k + 1)]
    weights = rng.random(len(pairs))
    class_mix = ratio ** -np.arange(m, dtype=np.float64)
    class_mix /= class_mix.sum()
    expected = (arrival * t_count * (weights / weights.sum())[:, None] * class_mix[None, :]).ravel()
    late = np.linspace(0.0, 1.0, m) if m > 1 else np.array([0.5])
    class_shape = np.column_stack([2.0 + 2.0 * late, 4.0 - 2.0 * late])
    shapes = np.tile(class_shape, (len(pairs), 1))

    products = []
    for o, d in pairs:
        path = tuple(leg_list[i].id for i in range(o, d))
        lowest = round(float(base[o:d].sum()) * taper ** (d - o - 1))
        for c in range(m):
            products.append(Product(
                id=f"{places[o]}-{places[d]}-{c}", fare=float(max(lowest, 1)) * ratio**c, legs=path,
                name=f"{place_name(o)} to {place_name(d)} class {c}", fare_class=str(c),
                origin=place_name(o), destination=place_name(d),
            ))
    try:
        curve = IndependentDemand.from_booking_curves(t_count, expected, shapes)
    except InputError as err:
        raise InputError(f"{owner}: {err}, or a lower 'arrival'") from None
    settings = {"legs": k, "alpha": alpha, "classes": m, "ratio": ratio, "periods": t_count,
                "arrival": arrival, "fares": [low, high], "taper": taper, "seed": seed}
    return _finish(owner, leg_list, products, curve.probabilities, alpha,
                   f"line_{k}_{m}_{alpha:g}_{t_count}_s{seed}",
                   f"generated line: {_settings_text(settings)}")
