"""Heuristic bid prices: EMSR-b's expected marginal seat revenue by period and seats left.

For a request in period t with x seats left on leg i, the bid price is the expected marginal seat
revenue of the x-th seat (:func:`rmkit.methods.shared.leg_heuristics.emsr_b_curve`),

    v(x) = min( f_{j(x)}, fbar_{j(x)} P(S_{j(x)} >= x) ),

where classes are the products using the leg ordered by the fare the leg counts for them
(``fare_basis``, :mod:`rmkit.methods.shared.fare_basis`; counted fare ``<= 0``: never accepted), ``S_j`` the
demand of classes 0..j still to come after the request (periods t+1..T-1, as the
``bid_price_table`` convention of :mod:`rmkit.results` asks), ``fbar_j`` their demand-weighted
fare, and ``j(x)`` the smallest EMSR-b nest (Belobaba 1992) protecting seat x. Demand is
Poisson with the summed mean, or normal with the summed Bernoulli variance (``law``). On the
leg alone, "accept a class iff its counted fare >= v(x)" accepts exactly what EMSR-b's nested
limits accept with x seats left, and the whole (period, seats) table costs one vectorised
EMSR-b pass per leg, so it stands for re-solving after every sale.

``multiplier`` scales every bid price (1.0 = as computed; tuned by calibration). With
``fare_basis="network"`` the displacement bid prices come from ``displacement_method`` (DLP
duals by default) at the solve state, and ``displacement_iterations`` rounds replace them by this
method's own bid prices at the solve state (unscaled).

Outputs: ``bid_price_table[t, x, i]`` (+inf at x = 0, NaN above leg i's capacity), ``bid_price``
at the solve state, ``net_fare`` (the counted fares) and ``value``: a leg-level estimate with no
guarantee, computed as in :mod:`rmkit.methods.emsrb` for the nested limits the solve period's bid
prices imply (``#{x : multiplier * v(x) > f_{c+1}}`` seats protected for classes 0..c).

Reference: P. P. Belobaba (1992), "Optimal vs. heuristic methods for nested seat allocation",
Proceedings of the AGIFORS Reservations Control Study Group; K. Littlewood (1972), "Forecasting
and control of passenger bookings", AGIFORS Symposium Proceedings 12:95-117 (the marginal seat
value ``f P(D >= x)``).
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from rmkit.methods.base import Param, Problem, Search, SolveOutput, Solver, Tags, register
from rmkit.methods.emsrb import (
    DISPLACEMENT_PARAMS,
    FARE_BASIS_PARAM,
    LAW_PARAM,
    LegBatch,
    leg_curves,
    leg_output,
    legs_value,
)
from rmkit.methods.shared.fare_basis import counted_fares_for, demand_moments, prorated_fares
from rmkit.methods.shared.leg_heuristics import levels_from_seat_values

#: each product's mean and variance of the requests still to come, by period (moments_to_come)
Moments = tuple[np.ndarray, np.ndarray]

CHUNK_CELLS = 4_000_000  # numbers per EMSR-b pass over a chunk of periods (~32 MB each)


def non_negative_float(v: Any) -> bool:
    return (
        isinstance(v, (int, float, np.integer, np.floating))
        and not isinstance(v, bool)
        and math.isfinite(v)
        and v >= 0
    )


@register
class EmsrbHeuristicBidPrices(Solver):
    """Heuristic EMSR-b bid prices by period and seats left (Belobaba 1992; Littlewood 1972)."""

    name = "emsrb-heuristic"
    tags = Tags(heuristic=True, capacity_dependent=True, control="table", needs_displacement=True)
    citation = (
        "P. P. Belobaba (1992), Optimal vs. heuristic methods for nested seat allocation, "
        "Proceedings of the AGIFORS Reservations Control Study Group"
    )
    params = {
        "fare_basis": FARE_BASIS_PARAM,
        **DISPLACEMENT_PARAMS,
        "law": LAW_PARAM,
        "multiplier": Param(1.0, "a finite number >= 0", non_negative_float,
                            Search("continuous", "multiplier on the seat values")),
    }

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        moments = demand_moments(problem.demand)
        counted, displacement = self._counted(problem, moments, params, seed)
        batch, table = self._table(problem, moments, counted, params)
        return self._output(problem, moments, batch, table, counted, displacement, params)

    def _resolve(self, problems, params, seeds, session) -> list[SolveOutput]:
        """States of one period that count the same fares share one table: the table depends on
        the state only through the counted fares (with the default prorated basis, not at all),
        so a re-solve round computes one EMSR-b pass per period instead of one per state."""
        tables: dict[tuple[int, bytes], tuple[LegBatch, np.ndarray]] = {}
        moments = demand_moments(problems[0].demand)  # one demand model
        outs = []
        for problem, seed in zip(problems, seeds, strict=True):
            counted, displacement = self._counted(problem, moments, params, seed)
            key = (problem.period, counted.tobytes())
            if key not in tables:
                tables[key] = self._table(problem, moments, counted, params)
            batch, table = tables[key]
            outs.append(self._output(problem, moments, batch, table, counted, displacement,
                                     params))
        session.count("states", len(problems))
        session.count("tables", len(tables))
        return outs

    def _counted(self, problem: Problem, moments: Moments, params: dict[str, Any],
                 seed: int | None):
        """The fares each leg counts at the solve state, and the displacement step behind them."""
        net, t0, x = problem.network, problem.period, problem.capacity
        law = params["law"]
        means, variances = moments
        legs = np.arange(net.n_legs)

        def own_bid_prices(counted: np.ndarray) -> np.ndarray:
            batch = LegBatch.build(counted, means[t0], None)
            _, values = leg_curves(batch, means[t0 + 1], variances[t0 + 1], law, int(x.max()))
            return values[legs, x]

        return counted_fares_for(
            problem,
            params["fare_basis"],
            params["displacement_iterations"],
            params["displacement_method"],
            seed,
            own_bid_prices,
        )

    def _table(self, problem: Problem, moments: Moments, counted: np.ndarray,
               params: dict[str, Any]) -> tuple[LegBatch, np.ndarray]:
        """The scaled bid-price table ``[t - t0, x, i]`` from the solve period on."""
        net, t0 = problem.network, problem.period
        law = params["law"]
        means, variances = moments
        # a request in period t is valued against the demand after it: rows t+1 .. T
        after_mean, after_var = means[t0 + 1 :], variances[t0 + 1 :]
        batch = LegBatch.build(counted, means[t0], None)
        n_rows, top = after_mean.shape[0], net.max_capacity
        values = np.empty((n_rows, net.n_legs, top + 1))
        # periods in chunks: the EMSR-b pass holds (periods x legs x classes x seats) numbers
        step = max(1, CHUNK_CELLS // max(1, net.n_legs * batch.width * top))
        for a in range(0, n_rows, step):
            rows = slice(a, a + step)
            values[rows] = leg_curves(batch, after_mean[rows], after_var[rows], law, top)[1]
        scale = float(params["multiplier"])
        table = np.full((n_rows, top + 1, net.n_legs), np.nan)
        for i, c in enumerate(net.capacities):
            table[:, 0, i] = np.inf
            table[:, 1 : c + 1, i] = scale * values[:, i, 1 : c + 1]
        return batch, table

    def _output(self, problem: Problem, moments: Moments, batch: LegBatch, table: np.ndarray,
                counted: np.ndarray, displacement, params: dict[str, Any]) -> SolveOutput:
        net, t0, x = problem.network, problem.period, problem.capacity
        law, top = params["law"], net.max_capacity
        means, variances = moments
        # the nested limits the solve period's (scaled) bid prices imply, for the value
        first = np.where(np.arange(top + 1)[None, :] <= x[:, None], table[0].T, -np.inf)
        levels = levels_from_seat_values(first, batch.fares)
        shares = prorated_fares(net)
        value = legs_value(batch, levels, x, means[t0], variances[t0], law, shares)
        variables = {
            "value": np.float64(value),
            "bid_price": table[0, x, np.arange(net.n_legs)],
            "bid_price_table": table,
            "net_fare": counted,
        }
        return leg_output(variables, displacement)
