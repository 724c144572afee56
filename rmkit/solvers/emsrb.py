"""EMSR-b nested booking limits on every leg (Belobaba 1987, 1992), leg by leg.

Each leg counts a fare for every product that uses it (``fare_basis``: full, prorated or
network contribution, see :mod:`rmkit.fare_adjust`); products with a counted fare ``<= 0`` are
closed on that leg. Every product is its own class on the leg, ordered by its counted fare
(equal counted fares share a class). Demand is the demand to come from the solve period, per
class Poisson with the summed mean (``law="poisson"``) or normal with the summed mean and the
summed Bernoulli variance ``sum_t p(1-p)`` (``law="normal"``). EMSR-b (Belobaba 1992) then gives
integer protection levels for the seats left at the solve state
(:func:`rmkit.leg_heuristics.emsr_b_curve`; normal levels are the continuous ones rounded to the
nearest integer).

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
(:func:`rmkit.fare_adjust.prorated_fares`, so a multi-leg sale is never counted twice) and summed
over legs. It treats the legs' acceptances as independent; simulate the policy for its network
revenue.

References: P. P. Belobaba (1987), *Air Travel Demand and Airline Seat Inventory Management*,
PhD thesis, MIT; P. P. Belobaba (1992), "Optimal vs. heuristic methods for nested seat
allocation", Proceedings of the AGIFORS Reservations Control Study Group.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from rmkit.fare_adjust import (
    FARE_BASES,
    LegClasses,
    counted_fares_for,
    leg_classes,
    moments_to_come,
    prorated_fares,
)
from rmkit.leg_heuristics import LAWS, demand_pmf, emsr_b_curve, nested_sales
from rmkit.network import Network
from rmkit.solver import Param, Problem, SolveOutput, Solver, Tags, non_negative_int, one_of, register


def is_method_name(v: Any) -> bool:
    return isinstance(v, str) and bool(v)


LAW_PARAM = Param("poisson", "one of 'poisson', 'normal'", one_of(*LAWS))
DISPLACEMENT_PARAMS = {
    "displacement_iterations": Param(0, "an integer >= 0", non_negative_int),
    "displacement_method": Param(
        "dlp", "the name of a registered method that gives leg bid prices", is_method_name
    ),
}
FARE_BASIS_PARAM = Param(
    "prorated", "one of " + ", ".join(repr(b) for b in FARE_BASES), one_of(*FARE_BASES)
)


@dataclass(frozen=True)
class LegNest:
    """One leg's EMSR-b control at the solve state: classes, integer levels, seat values."""

    classes: LegClasses
    levels: np.ndarray  # (k-1,) seats protected for classes 0..c against c+1
    seat_values: np.ndarray  # (x+1,) EMSR-b value of the x-th seat, +inf at 0


def leg_nests(
    network: Network,
    counted: np.ndarray,
    mean: np.ndarray,
    var: np.ndarray,
    capacity: np.ndarray,
    law: str,
    n_buckets: int | None,
) -> list[LegNest]:
    """EMSR-b on every leg from counted fares and per-product demand moments (``(n,)``)."""
    out = []
    for i in range(network.n_legs):
        classes = leg_classes(counted[i], mean, n_buckets)
        levels, values = emsr_b_curve(
            classes.fares,
            classes.class_totals(mean),
            classes.class_totals(var),
            law,
            int(capacity[i]),
        )
        out.append(LegNest(classes, levels, values))
    return out


def leg_revenue(
    classes: LegClasses, levels: np.ndarray, seats: int, mean, var, law: str, shares: np.ndarray
) -> float:
    """Expected sales of nested levels on one leg alone (static model), at prorated shares."""
    if classes.n_classes == 0 or seats == 0:
        return 0.0
    m = classes.class_totals(mean)
    sd = np.sqrt(classes.class_totals(var)) if law == "normal" else None
    sales = nested_sales(demand_pmf(m, sd, law, seats), seats, levels)
    return float(classes.class_means(shares, mean) @ sales)


def nested_variables(
    network: Network,
    nests: list[LegNest],
    capacity: np.ndarray,
    n_bucket_dim: int,
    mean: np.ndarray,
    var: np.ndarray,
    law: str,
) -> dict[str, np.ndarray]:
    """Protection levels, booking limits, buckets and the bid-price view in the schema's shape."""
    n_legs = network.n_legs
    protection = np.repeat(capacity.astype(np.int64)[:, None], n_bucket_dim, axis=1)
    bucket = np.full((n_legs, network.n_products), -1, dtype=np.int64)
    bucket_fare = np.full((n_legs, n_bucket_dim), np.nan)
    bid = np.empty(n_legs)
    value = 0.0
    shares = prorated_fares(network)
    for i, nest in enumerate(nests):
        k = nest.classes.n_classes
        protection[i, : max(k - 1, 0)] = nest.levels
        bucket[i] = nest.classes.bucket
        bucket_fare[i, :k] = nest.classes.fares
        bid[i] = nest.seat_values[int(capacity[i])]
        value += leg_revenue(nest.classes, nest.levels, int(capacity[i]), mean, var, law, shares[i])
    limit = np.empty_like(protection)
    limit[:, 0] = capacity
    limit[:, 1:] = capacity[:, None] - protection[:, :-1]
    return {
        "value": np.float64(value),
        "bid_price": bid,
        "protection_level": protection,
        "booking_limit": limit,
        "bucket": bucket,
        "bucket_fare": bucket_fare,
    }


def solve_nested(
    problem: Problem, params: dict[str, Any], seed: int | None, basis: str, n_buckets: int | None,
    n_bucket_dim: int,
) -> SolveOutput:
    """The whole nested solve shared by ``emsrb`` and ``davn``."""
    net = problem.network
    means, variances = moments_to_come(problem.demand.probabilities)
    mean, var = means[problem.period], variances[problem.period]
    law = params["law"]

    def own_bid_prices(counted: np.ndarray) -> np.ndarray:
        nests = leg_nests(net, counted, mean, var, problem.capacity, law, n_buckets)
        return np.array([n.seat_values[int(x)] for n, x in zip(nests, problem.capacity, strict=True)])

    counted, displacement = counted_fares_for(
        problem,
        basis,
        params["displacement_iterations"],
        params["displacement_method"],
        seed,
        own_bid_prices,
    )
    nests = leg_nests(net, counted, mean, var, problem.capacity, law, n_buckets)
    variables = nested_variables(net, nests, problem.capacity, n_bucket_dim, mean, var, law)
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
    tags = Tags(heuristic=True, control="nested")
    citation = (
        "P. P. Belobaba (1992), Optimal vs. heuristic methods for nested seat allocation, "
        "Proceedings of the AGIFORS Reservations Control Study Group; P. P. Belobaba (1987), "
        "Air Travel Demand and Airline Seat Inventory Management, PhD thesis, MIT"
    )
    params = {"fare_basis": FARE_BASIS_PARAM, **DISPLACEMENT_PARAMS, "law": LAW_PARAM}

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        n = problem.network.n_products
        return solve_nested(problem, params, seed, params["fare_basis"], None, n)
