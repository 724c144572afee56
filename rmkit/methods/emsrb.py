"""EMSR-b nested booking limits on every leg (Belobaba 1987, 1992), leg by leg.

Each leg counts a fare for every product that uses it (``fare_basis``: full, prorated or
network contribution, see :mod:`rmkit.methods.shared.fare_basis`); products with a counted fare ``<= 0`` are
closed on that leg. Every product is its own class on the leg, ordered by its counted fare
(equal counted fares share a class). Demand is the demand to come from the solve period, per
class Poisson with the summed mean (``law="poisson"``) or normal with the summed mean and the
summed Bernoulli variance ``sum_t p(1-p)`` (``law="normal"``). EMSR-b (Belobaba 1992) then gives
integer protection levels for the seats left at the solve state
(:func:`rmkit.methods.shared.leg_heuristics.emsr_b_curve`; normal levels are the continuous ones rounded
to the nearest integer).

Nested booking-limit convention (what the simulator applies)
------------------------------------------------------------
Bucket 0 is the most valuable. On leg i a request for product j falls in bucket
``b = bucket[i, j]`` (``-1``: closed on that leg). It is accepted iff, counting sales from the
solve state on, the seats sold into buckets ``b, b+1, ...`` (b and the less valuable ones),
including this one, stay within ``booking_limit[i, b]``. With ``x_i`` the seats left at the solve
state and ``protection_level[i, b]`` the seats protected for buckets ``0..b``::

    booking_limit[i, 0] = x_i,    booking_limit[i, b] = x_i - protection_level[i, b - 1].

Buckets past a leg's last class are unused: protection ``x_i``, booking limit 0, bucket fare NaN.
The ``bucket`` dimension has one entry per product here (the most classes a leg can have).

Equivalent bid-price view: ``bid_price[i]`` is EMSR-b's expected marginal seat revenue of the
``x_i``-th seat (+inf when no seat is left); on the leg alone, "accept bucket b iff its fare >=
bid price" accepts exactly the buckets the nested limits accept at the solve state.

``value`` is a leg-level estimate with no guarantee: each leg's expected sales per class under
its nested limits, on the leg alone in the static model (lowest class books first, demand to
come from the solve period), credited at the prorated share of each fare
(:func:`rmkit.methods.shared.fare_basis.prorated_fares`, so a multi-leg sale is never counted twice) and
summed over legs. It treats the legs' acceptances as independent; simulate the policy for its network
revenue.

References: P. P. Belobaba (1987), *Air Travel Demand and Airline Seat Inventory Management*,
PhD thesis, MIT; P. P. Belobaba (1992), "Optimal vs. heuristic methods for nested seat
allocation", Proceedings of the AGIFORS Reservations Control Study Group.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from rmkit.methods.base import (
    Param,
    Problem,
    Search,
    SolveOutput,
    Solver,
    Tags,
    non_negative_int,
    one_of,
    register,
)
from rmkit.methods.shared.fare_basis import (
    FARE_BASES,
    LegClasses,
    counted_fares_for,
    demand_moments,
    leg_classes,
    prorated_fares,
)
from rmkit.methods.shared.leg_heuristics import LAWS, emsr_b_curve
from rmkit.methods.shared.nested_static import demand_pmf_grid, nested_sales_batch
from rmkit.model.network import Network


def is_method_name(v: Any) -> bool:
    return isinstance(v, str) and bool(v)


LAW_PARAM = Param("poisson", "one of 'poisson', 'normal'", one_of(*LAWS),
                  Search("choice", "demand law of the leg heuristic", LAWS))
DISPLACEMENT_PARAMS = {
    "displacement_iterations": Param(0, "an integer >= 0", non_negative_int,
                                     Search("integer", "displacement (network fare) iterations")),
    "displacement_method": Param(
        "dlp", "the name of a registered method that gives leg bid prices", is_method_name
    ),
}
FARE_BASIS_PARAM = Param(
    "prorated", "one of " + ", ".join(repr(b) for b in FARE_BASES), one_of(*FARE_BASES),
    Search("choice", "fare a leg counts for a multi-leg product", FARE_BASES),
)


@dataclass(frozen=True)
class LegBatch:
    """Every leg's classes, padded to one width with zero-fare, zero-demand classes.

    The padding lets EMSR-b and the static-model revenue run on all legs in one vectorised call
    (:func:`rmkit.methods.shared.leg_heuristics.emsr_b_curve` and
    :func:`~rmkit.methods.shared.nested_static.nested_sales_batch` document why it changes nothing).
    """

    classes: tuple[LegClasses, ...]

    @classmethod
    def build(cls, counted: np.ndarray, weights: np.ndarray, n_buckets: int | None) -> LegBatch:
        return cls(tuple(leg_classes(row, weights, n_buckets) for row in counted))

    @property
    def width(self) -> int:
        return max((c.n_classes for c in self.classes), default=0)

    @property
    def fares(self) -> np.ndarray:
        """``(leg, width)`` class fares, 0 in the padding."""
        return self._padded([c.fares for c in self.classes])

    def totals(self, per_product: np.ndarray) -> np.ndarray:
        """``(..., leg, width)``: a per-product quantity summed over each class, 0 in the padding."""
        return self._padded([c.class_totals(per_product) for c in self.classes])

    def means(self, per_leg_product: np.ndarray, weights: np.ndarray) -> np.ndarray:
        """``(leg, width)``: a ``(leg, product)`` quantity averaged over each class, by weight."""
        return self._padded(
            [c.class_means(per_leg_product[i], weights) for i, c in enumerate(self.classes)]
        )

    def _padded(self, rows: list[np.ndarray]) -> np.ndarray:
        out = np.zeros((*np.shape(rows[0])[:-1], len(rows), self.width))
        for i, row in enumerate(rows):
            out[..., i, : np.shape(row)[-1]] = row
        return out


def leg_curves(batch: LegBatch, mean: np.ndarray, var: np.ndarray, law: str, n_seats: int):
    """EMSR-b levels ``(..., leg, width-1)`` and seat values ``(..., leg, n_seats+1)``."""
    return emsr_b_curve(batch.fares, batch.totals(mean), batch.totals(var), law, n_seats)


def legs_value(
    batch: LegBatch,
    levels: np.ndarray,
    seats: np.ndarray,
    mean: np.ndarray,
    var: np.ndarray,
    law: str,
    shares: np.ndarray,
) -> float:
    """Expected sales of nested levels on each leg alone (static model), at prorated shares.

    ``levels`` ``(leg, width-1)`` is clipped to each leg's seats; padding classes sell nothing.
    """
    if batch.width == 0:
        return 0.0
    m = batch.totals(mean)
    sd = np.sqrt(batch.totals(var)) if law == "normal" else None
    pmfs = demand_pmf_grid(m, sd, law, int(seats.max(initial=0)))
    sales = nested_sales_batch(pmfs, seats, np.minimum(levels, seats[:, None]))
    return float((batch.means(shares, mean) * sales).sum())


def nested_variables(
    network: Network,
    batch: LegBatch,
    capacity: np.ndarray,
    n_bucket_dim: int,
    mean: np.ndarray,
    var: np.ndarray,
    law: str,
) -> dict[str, np.ndarray]:
    """Protection levels, booking limits, buckets and the bid-price view in the schema's shape."""
    n_legs = network.n_legs
    x = capacity.astype(np.int64)
    levels, values = leg_curves(batch, mean, var, law, int(x.max(initial=0)))
    levels = np.minimum(levels, x[:, None])
    protection = np.repeat(x[:, None], n_bucket_dim, axis=1)
    bucket_fare = np.full((n_legs, n_bucket_dim), np.nan)
    for i, classes in enumerate(batch.classes):
        k = classes.n_classes
        protection[i, : max(k - 1, 0)] = levels[i, : max(k - 1, 0)]
        bucket_fare[i, :k] = classes.fares
    limit = np.empty_like(protection)
    limit[:, 0] = x
    limit[:, 1:] = x[:, None] - protection[:, :-1]
    shares = prorated_fares(network)
    return {
        "value": np.float64(legs_value(batch, levels, x, mean, var, law, shares)),
        "bid_price": values[np.arange(n_legs), x],
        "protection_level": protection,
        "booking_limit": limit,
        "product_bucket": np.array([c.bucket for c in batch.classes], dtype=np.int64),
        "bucket_fare": bucket_fare,
    }


def solve_nested(
    problem: Problem, params: dict[str, Any], seed: int | None, basis: str, n_buckets: int | None,
    n_bucket_dim: int,
) -> SolveOutput:
    """The whole nested solve shared by ``emsrb`` and ``davn``."""
    net = problem.network
    means, variances = demand_moments(problem.demand)
    mean, var = means[problem.period], variances[problem.period]
    law = params["law"]

    def own_bid_prices(counted: np.ndarray) -> np.ndarray:
        x = problem.capacity
        _, values = leg_curves(LegBatch.build(counted, mean, n_buckets), mean, var, law, int(x.max()))
        return values[np.arange(net.n_legs), x]

    counted, displacement = counted_fares_for(
        problem,
        basis,
        params["displacement_iterations"],
        params["displacement_method"],
        seed,
        own_bid_prices,
    )
    batch = LegBatch.build(counted, mean, n_buckets)
    variables = nested_variables(net, batch, problem.capacity, n_bucket_dim, mean, var, law)
    variables["net_fare"] = counted
    return leg_output(variables, displacement)


def leg_output(variables: dict[str, np.ndarray], displacement) -> SolveOutput:
    """Package variables with the displacement step's status, message and bid prices."""
    if displacement is None:
        return SolveOutput(variables)
    return SolveOutput(
        variables,
        status=displacement.status,
        message=displacement.message,
        payload={
            "displacement_bid_price": displacement.bid_prices,
            "displacement_iterations": displacement.iterations,
            "displacement_converged": displacement.converged,
        },
    )


@register
class EmsrbNested(Solver):
    """EMSR-b nested booking limits per leg (Belobaba 1987; Belobaba 1992)."""

    name = "emsrb"
    tags = Tags(heuristic=True, control="nested", needs_displacement=True)
    citation = (
        "P. P. Belobaba (1992), Optimal vs. heuristic methods for nested seat allocation, "
        "Proceedings of the AGIFORS Reservations Control Study Group; P. P. Belobaba (1987), "
        "Air Travel Demand and Airline Seat Inventory Management, PhD thesis, MIT"
    )
    params = {"fare_basis": FARE_BASIS_PARAM, **DISPLACEMENT_PARAMS, "law": LAW_PARAM}

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        n = problem.network.n_products
        return solve_nested(problem, params, seed, params["fare_basis"], None, n)
