"""The fare a leg counts for each product, and the classes a leg nests those fares in.

A leg-level control sees one leg at a time, so a product that uses several legs must be given a
fare on each of them. Three bases (``fare_basis``), as a ``(leg, product)`` table ``g[i, j]``
(NaN where product j does not use leg i):

``"full"``
    ``g[i, j] = f_j``: every leg counts the whole fare (multi-leg products are overvalued).
``"prorated"``
    The fare is split over the product's legs in proportion to the legs' reference fares,
    ``g[i, j] = f_j r_i / sum_{k in legs(j)} r_k``, where ``r_i`` is the mean fare of the one-leg
    products on leg i. When some leg of j has no one-leg product (no reference), j's fare is
    split equally over its legs. One-leg products keep their fare; shares always add up to f_j.
``"network"``
    The network contribution (displacement-adjusted fare, Smith, Leimkuhler & Darrow 1992;
    Williamson 1992): ``g[i, j] = f_j - sum_{k in legs(j), k != i} pi_k``, the fare less the
    bid prices of the product's other legs, from any leg bid-price vector ``pi`` (by default the
    DLP duals at the solve state, :func:`displacement_bid_prices`). Bid prices above the highest
    fare are capped there (a leg with no seat left has ``+inf``; the cap closes the same
    products without ``inf - inf``).

A product whose counted fare on a leg is ``<= 0`` is never accepted on that leg (it gets no
class there). Iterating the displacement (:func:`iterate_displacement`): the leg heuristic's own
bid prices at the solve state, computed from the net fares, replace ``pi`` and the net fares are
recomputed, for a set number of rounds or until the bid prices stop moving (a fixed point).

On each leg the products with a positive counted fare are sorted from high to low and grouped
into classes (:func:`leg_classes`): equal fares always share a class; with a bucket count the
distinct fares are grouped as :func:`rmkit.methods.shared.leg_heuristics.group_fares` documents. A
class's fare is the demand-weighted mean of its members' counted fares.

>>> net = Network.build(
...     legs=[("A", 5), ("B", 5)],
...     products=[("a", 100.0, ["A"]), ("b", 300.0, ["B"]), ("ab", 500.0, ["A", "B"])],
... )
>>> prorated_fares(net)[:, 2].tolist()  # references 100 and 300
[125.0, 375.0]
>>> network_fares(net, [80.0, 200.0])[:, 2].tolist()  # 500 - 200 on A, 500 - 80 on B
[300.0, 420.0]
"""

from __future__ import annotations

import weakref
from collections.abc import Callable
from dataclasses import dataclass
from functools import cached_property

import numpy as np

from rmkit.errors import InputError
from rmkit.model.network import Network

FARE_BASES = ("full", "prorated", "network")


def full_fares(network: Network) -> np.ndarray:
    """``(leg, product)``: the whole fare on every leg a product uses, NaN elsewhere."""
    a = network.incidence.astype(bool)
    return np.where(a, network.fares[None, :], np.nan)


def prorated_fares(network: Network) -> np.ndarray:
    """``(leg, product)``: fares split in proportion to the legs' mean one-leg fares."""
    a = network.incidence.astype(np.float64)
    single = a.sum(axis=0) == 1
    count = (a * single).sum(axis=1)
    ref = np.where(count > 0, (a * single * network.fares).sum(axis=1) / np.maximum(count, 1), 0.0)
    weight = a * ref[:, None]
    has_ref = np.all((a == 0) | (count[:, None] > 0), axis=0)  # every leg of j has a reference
    weight = np.where(has_ref[None, :], weight, a)
    share = weight / weight.sum(axis=0, keepdims=True)
    return np.where(a > 0, share * network.fares[None, :], np.nan)


def check_bid_prices(network: Network, bid_prices: object) -> np.ndarray:
    pi = np.asarray(bid_prices, dtype=np.float64)
    if pi.shape != (network.n_legs,):
        raise InputError(
            f"bid_prices: needs one bid price per leg ({network.n_legs}), got shape {pi.shape}"
        )
    for i, v in enumerate(pi.tolist()):
        if np.isnan(v) or v < 0:
            raise InputError(
                f"bid_prices[{i}]: bid price of leg {network.legs[i].id!r} must be >= 0, got {v!r}"
            )
    return np.minimum(pi, float(network.fares.max()))


def network_fares(network: Network, bid_prices: object) -> np.ndarray:
    """``(leg, product)``: fare minus the bid prices of the product's other legs, NaN off-leg."""
    pi = check_bid_prices(network, bid_prices)
    a = network.incidence.astype(np.float64)
    path_price = pi @ a  # sum of the bid prices of each product's legs
    net = network.fares[None, :] - (path_price[None, :] - pi[:, None])
    return np.where(a > 0, net, np.nan)


def leg_fares(network: Network, basis: str, bid_prices: object = None) -> np.ndarray:
    """The counted-fare table for a basis; ``"network"`` needs ``bid_prices``."""
    if basis == "full":
        return full_fares(network)
    if basis == "prorated":
        return prorated_fares(network)
    if basis == "network":
        if bid_prices is None:
            raise InputError("bid_prices: fare_basis='network' needs one bid price per leg")
        return network_fares(network, bid_prices)
    raise InputError(f"fare_basis: must be one of {', '.join(map(repr, FARE_BASES))}, got {basis!r}")


@dataclass(frozen=True)
class Displacement:
    """Leg bid prices used for the network contribution and where they came from."""

    bid_prices: np.ndarray
    status: str = "optimal"
    message: str = ""
    iterations: int = 0
    converged: bool = True


def displacement_bid_prices(
    network: Network,
    demand,
    period: int,
    capacity: np.ndarray,
    method: str = "dlp",
    seed: int | None = None,
) -> Displacement:
    """Leg bid prices of a network method (DLP duals by default) at a booking state."""
    from rmkit.methods.base import get_solver
    from rmkit.results import BookingState

    solver = get_solver(method)
    if solver.tags.needs_displacement:
        raise InputError(
            f"displacement_method: {method!r} itself needs displacement bid prices; use a "
            "network method such as 'dlp'"
        )
    if not solver.tags.gives_bid_prices:
        raise InputError(f"displacement_method: {method!r} gives no bid prices; use e.g. 'dlp'")
    state = BookingState(period=int(period), capacity=tuple(int(c) for c in capacity))
    res = solver.solve(network, demand, state=state, seed=seed)
    pi = np.asarray(res.bid_prices, dtype=np.float64)
    return Displacement(pi, res.status, f"displacement bid prices from {method}: {res.message}")


def iterate_displacement(
    network: Network,
    start: Displacement,
    leg_bid_prices: Callable[[np.ndarray], np.ndarray],
    iterations: int,
) -> tuple[np.ndarray, Displacement]:
    """Net fares after up to ``iterations`` rounds of ``pi <- leg_bid_prices(net fares(pi))``.

    Stops early at a fixed point (no bid price moves by more than 1e-9 of the highest fare).
    Returns the final net fares and the bid prices they were computed from.
    """
    tol = 1e-9 * float(network.fares.max())
    pi = check_bid_prices(network, start.bid_prices)
    done = 0
    converged = iterations == 0
    for _ in range(iterations):
        new = check_bid_prices(network, leg_bid_prices(network_fares(network, pi)))
        done += 1
        moved = float(np.max(np.abs(new - pi)))
        pi = new
        if moved <= tol:
            converged = True
            break
    note = start.message
    if iterations:
        state = "reached a fixed point" if converged else "stopped before a fixed point"
        note += f"; {done} displacement iteration(s), {state}"
    final = Displacement(pi, start.status, note, done, converged)
    return network_fares(network, pi), final


@dataclass(frozen=True)
class LegClasses:
    """The nesting classes of one leg.

    ``fares[c]`` strictly decreasing; ``bucket[j]`` the class of product j, -1 when it has none
    on this leg.
    """

    fares: np.ndarray
    bucket: np.ndarray

    @property
    def n_classes(self) -> int:
        return int(self.fares.size)

    def class_totals(self, per_product: np.ndarray) -> np.ndarray:
        """Sum a ``(..., n_products)`` quantity (means, variances) over each class's members."""
        v = np.asarray(per_product, dtype=np.float64)
        if self.n_classes == 0:
            return np.zeros((*v.shape[:-1], 0))
        order, starts = self._members
        # index sums, not a 0/1 matrix product: no BLAS call, exact, cheap for tall tables
        return np.add.reduceat(v[..., order], starts, axis=-1)

    @cached_property
    def _members(self) -> tuple[np.ndarray, np.ndarray]:
        """Products ordered by class, and where each class starts (computed once: the leg
        heuristics total a dozen quantities over the same classes)."""
        order = np.argsort(np.where(self.bucket >= 0, self.bucket, self.n_classes), kind="stable")
        order = order[: np.count_nonzero(self.bucket >= 0)]
        return order, np.searchsorted(self.bucket[order], np.arange(self.n_classes))

    def class_means(self, per_product: np.ndarray, weights: np.ndarray) -> np.ndarray:
        """``(k,)`` weighted mean of a per-product quantity over each class (plain if no weight)."""
        v = np.nan_to_num(np.asarray(per_product, dtype=np.float64))
        w = np.where(self.bucket >= 0, weights, 0.0)
        count = self.class_totals(np.ones_like(v))
        wsum = self.class_totals(w)
        plain = self.class_totals(v) / np.maximum(count, 1)
        weighted = self.class_totals(w * v) / np.where(wsum > 0, wsum, 1.0)
        return np.where(wsum > 0, weighted, plain)


def leg_classes(counted: np.ndarray, weights: np.ndarray, n_buckets: int | None = None) -> LegClasses:
    """Classes of one leg from its counted fares (NaN or <= 0: no class) and demand weights."""
    from rmkit.methods.shared.leg_heuristics import group_fares

    g = np.asarray(counted, dtype=np.float64)
    open_ = np.flatnonzero(np.isfinite(g) & (g > 0))
    order = open_[np.argsort(-g[open_], kind="stable")]
    labels = group_fares(g[order], weights[order], n_buckets)
    k = int(labels.max()) + 1 if labels.size else 0
    bucket = np.full(g.size, -1, dtype=np.int64)
    bucket[order] = labels
    shell = LegClasses(fares=np.zeros(k), bucket=bucket)
    return LegClasses(fares=shell.class_means(g, weights), bucket=bucket)


# ------------------------------------------------------------------ what the leg solvers share
_MOMENTS: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


def demand_moments(demand) -> tuple[np.ndarray, np.ndarray]:
    """:func:`moments_to_come` of the demand model's sale probabilities, kept (read-only) per
    model: models do not change, and a re-solve round asks for them once per state."""
    try:
        return _MOMENTS[demand]
    except (KeyError, TypeError):
        pass
    out = moments_to_come(demand.sale_probabilities())
    for a in out:
        a.setflags(write=False)
    try:
        _MOMENTS[demand] = out
    except TypeError:  # a model that cannot be weakly referenced: computed each time
        pass
    return out


def moments_to_come(probabilities: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(T+1, n)`` mean and variance of each product's requests in periods t..T-1.

    The count is a sum of independent Bernoulli(p[s, j]) draws, so the variance is
    ``sum_s p(1 - p)``; the normal law uses both, the Poisson law the mean only.
    """
    p = np.asarray(probabilities, dtype=np.float64)
    mean = np.zeros((p.shape[0] + 1, p.shape[1]))
    var = np.zeros_like(mean)
    mean[:-1] = np.cumsum(p[::-1], axis=0)[::-1]
    var[:-1] = np.cumsum((p * (1.0 - p))[::-1], axis=0)[::-1]
    return mean, var


def counted_fares_for(
    problem,
    basis: str,
    iterations: int,
    method: str,
    seed: int | None,
    leg_bid_prices: Callable[[np.ndarray], np.ndarray],
) -> tuple[np.ndarray, Displacement | None]:
    """The counted-fare table of a solve, with the displacement bid prices when basis is network.

    ``leg_bid_prices(net)`` is the heuristic's own leg bid prices at the solve state from a net
    fare table; it drives the optional displacement iterations.
    """
    if basis != "network":
        return leg_fares(problem.network, basis), None
    start = displacement_bid_prices(
        problem.network, problem.demand, problem.period, problem.capacity, method, seed
    )
    return iterate_displacement(problem.network, start, leg_bid_prices, iterations)
