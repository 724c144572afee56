"""DPD: dynamic programming decomposition with displacement-adjusted leg fares.

References: K. T. Talluri and G. J. van Ryzin (2004), *The Theory and Practice of Revenue
Management*, Springer, section 3.4 (decomposition approaches); Q. Liu and G. van Ryzin (2008),
"On the choice-based linear programming model for network revenue management", *Manufacturing &
Service Operations Management* 10(2):288-310 (the decomposition in the independent-demand case).

Each leg i keeps its own seats and prices the rest of the network by the DLP leg duals
``mu`` at the state solved from: a request for product j counts on leg i for its fare less the
displacement of the other legs it uses, floored at zero,

.. math::

    r_{ij} = \\max\\bigl(0,\\ f_j - \\sum_{k \\in j,\\, k \\ne i} \\mu_k\\bigr),

and leg i solves the single-leg DP

.. math::

    v_i(t, x) = v_i(t+1, x) + \\sum_{j \\ni i} p_{tj} \\max(0, r_{ij} - (v_i(t+1, x) - v_i(t+1, x-1))).

The bid price of leg i for a request in period t with x seats left is
``v_i(t+1, x) - v_i(t+1, x-1)``: it depends on both the seats left and the time to go. With
``iterations > 1`` the duals are re-estimated from the leg value functions, ``mu_i`` becoming
the value of leg i's last seat at the state, ``v_i(t0, x_i) - v_i(t0, x_i - 1)`` (``+inf`` when
the leg is full), and the leg DPs are solved again with the new displaced fares.

The reported ``value`` is ``sum_i v_i(t0, x_i)``, an approximation of the network's value to go;
it is neither an upper nor a lower bound in general (the tags say heuristic).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.methods.base import Param, Problem, SolveOutput, Solver, Tags, one_of, positive_int, register
from rmkit.methods.dlp import leg_duals
from rmkit.methods.shared.leg_dp import bid_prices_at, leg_tables, network_leg_values, value_at
from rmkit.methods.shared.network_lp import DUAL_CHOICES
from rmkit.model.network import Network


def displaced_fares(network: Network, duals: np.ndarray) -> np.ndarray:
    """``(L, n)`` leg fares ``max(0, f_j - sum of the other legs' duals)``; 0 off the product.

    A dual may be ``+inf`` (a full leg): the products through it then count for nothing on
    the other legs.
    """
    a = network.incidence > 0
    mu = np.asarray(duals, dtype=np.float64)
    out = np.zeros(a.shape)
    for i in range(network.n_legs):
        others = a.copy()
        others[i] = False
        displacement = np.where(others, mu[:, None], 0.0).sum(axis=0)
        out[i] = np.where(a[i], np.maximum(network.fares - displacement, 0.0), 0.0)
    return out


@register
class DPDecomposition(Solver):
    """DP decomposition (Talluri & van Ryzin 2004, sec. 3.4; Liu & van Ryzin 2008).

    K. T. Talluri and G. J. van Ryzin (2004), The Theory and Practice of Revenue Management,
    section 3.4; Q. Liu and G. van Ryzin (2008), On the choice-based linear programming model
    for network revenue management, MSOM 10(2):288-310. Leg DPs with fares reduced by the other
    legs' DLP duals; see the module docstring.
    """

    name = "dpd"
    tags = Tags(heuristic=True, capacity_dependent=True, control="table")
    citation = (
        "K. T. Talluri and G. J. van Ryzin (2004), The Theory and Practice of Revenue "
        "Management, Springer, sec. 3.4; Q. Liu and G. van Ryzin (2008), On the choice-based "
        "linear programming model for network revenue management, MSOM 10(2):288-310"
    )
    params = {
        "iterations": Param(1, "a whole number >= 1 (leg DP passes)", positive_int),
        "dual": Param("highs", "one of " + ", ".join(repr(c) for c in DUAL_CHOICES),
                      one_of(*DUAL_CHOICES)),
    }

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        network, x = problem.network, problem.capacity
        prob = problem.probabilities
        duals = leg_duals(problem, params["dual"])
        for _ in range(params["iterations"]):
            fares = displaced_fares(network, duals)
            values = network_leg_values(prob, np.broadcast_to(fares[:, None, :], (network.n_legs,
                                                                          prob.shape[0],
                                                                          network.n_products)),
                                network)
            legs = np.arange(network.n_legs)
            last = np.where(x > 0, values[legs, 0, np.maximum(x - 1, 0)], np.nan)
            duals = np.where(x > 0, value_at(values, x) - last, np.inf)
        leg_value, table = leg_tables(values)
        return SolveOutput(
            variables={
                "value": np.float64(value_at(values, x).sum()),
                "leg_value": leg_value,
                "bid_price_table": table,
                "bid_price": bid_prices_at(table, x),
                "net_fare": fares,
            },
            message=(
                "value: sum of the leg values at the state (an approximation, not a bound); "
                f"{params['iterations']} leg DP pass(es) from the DLP duals ({params['dual']})"
            ),
        )
