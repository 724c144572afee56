"""CDPD: dynamic programming decomposition for choice demand, from the CDLP duals.

Liu & van Ryzin (2008), "On the choice-based linear programming model for network revenue
management", MSOM 10(2):288-310, sec. 4 (the decomposition); Bront, Mendez-Diaz & Vulcano (2009),
Operations Research 57(3):769-784, sec. 5 (its use with column generation). Each leg i keeps its
own seats and prices every other leg k at its CDLP dual pi_k (:mod:`rmkit.methods.cdlp`, from
the state solved from)::

    v_i(t, x) = v_i(t+1, x) + max_S sum_j P_tj(S) (f_j - sum_{k in j, k != i} pi_k
                                                     - A_ij (v_i(t+1, x) - v_i(t+1, x-1))),

with the products on leg i closed at x = 0 (kernel :func:`rmkit.kernels.choice_dp.choice_leg_values`,
the max split over components). The bid price of leg i for a customer in period t with x seats
left is ``v_i(t+1, x) - v_i(t+1, x-1)``; the policy (control ``set_max``) offers in each state
the set maximising ``sum_j P_tj(S) (f_j - sum_{i in j} bid price_i)``.

The reported ``value`` is ``min_i (v_i(t0, x_i) + sum_{k != i} pi_k x_k)``, leg i's estimate of
the network value with the other legs' seats valued at their duals; it is an approximation, not
claimed as a bound (the tags say heuristic).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.methods.base import Problem, SolveOutput, Solver, Tags, register
from rmkit.methods.shared.cdlp import solve_cdlp
from rmkit.methods.shared.leg_dp import bid_prices_at, leg_tables
from rmkit.methods.shared.network_lp import raise_or_warn
from rmkit.methods.shared.offer_sets import component_refusal, offer_sets
from rmkit.model.demand import DemandModel
from rmkit.model.network import Network


@register
class ChoiceDPDecomposition(Solver):
    """Choice DP decomposition (Liu & van Ryzin 2008, sec. 4): leg DPs over offer sets with the
    other legs priced at the CDLP duals; the set-maximising rule as policy."""

    name = "cdpd"
    tags = Tags(heuristic=True, capacity_dependent=True, control="set_max")
    citation = (
        "Q. Liu and G. van Ryzin (2008), On the choice-based linear programming model for network "
        "revenue management, MSOM 10(2):288-310, sec. 4; J. J. Miranda Bront, I. Mendez-Diaz and "
        "G. Vulcano (2009), A column generation algorithm for choice-based network revenue "
        "management, Operations Research 57(3):769-784"
    )
    demand_kinds = ("choice",)

    def accepts(self, network: Network, demand: DemandModel) -> str | None:
        return component_refusal(demand)  # type: ignore[arg-type]

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        from rmkit.kernels.choice_dp import choice_leg_values

        network, x = problem.network, problem.capacity
        demand = problem.demand
        sol = solve_cdlp(network, demand, problem.period, x)  # type: ignore[arg-type]
        raise_or_warn(self.name, sol.status, sol.message)
        pi = sol.leg_duals
        a = network.incidence > 0
        tables = offer_sets(demand, problem.period)  # type: ignore[arg-type]
        n_k = demand.n_periods - problem.period
        values = np.full((network.n_legs, n_k + 1, network.max_capacity + 1), np.nan)
        for i in range(network.n_legs):
            others = np.where(a, pi[:, None], 0.0)
            others[i] = 0.0
            base = network.fares - others.sum(axis=0)
            leg = np.zeros((n_k + 1, int(network.capacities[i]) + 1))
            choice_leg_values(*tables.arrays(), base, a[i].astype(np.uint8),
                              int(network.capacities[i]), leg)
            values[i, :, : leg.shape[1]] = leg
        leg_value, table = leg_tables(values)
        here = values[np.arange(network.n_legs), 0, x]
        estimate = here + float(pi @ x) - pi * x
        return SolveOutput(
            variables={
                "value": np.float64(estimate.min()),
                "leg_value": leg_value,
                "bid_price_table": table,
                "bid_price": bid_prices_at(table, x),
            },
            message=("value: min over legs of the leg value plus the other legs' seats at their "
                     "CDLP duals (an approximation, not a bound)"),
            payload={"offer_tables": tables, "cdlp_duals": pi},
        )
