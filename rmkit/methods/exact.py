"""``exact``: the network dynamic program solved over the whole capacity grid.

The finite-horizon DP of the standard network model (Talluri & van Ryzin 2004, *The Theory and
Practice of Revenue Management*, section 3.1; maths and conventions in
:mod:`rmkit.methods.shared.network_dp`). Its value at the state solved from is the optimal expected
revenue to go, the yardstick of every other method on small networks.

Result variables
----------------
``value``
    ``V_{t0}(x0)``.
``bid_price``
    Leg marginal values ``V_{t0+1}(x0) - V_{t0+1}(x0 - e_i)``; ``+inf`` for a leg with no seat
    left (as in the ``bid_price_table`` convention of :mod:`rmkit.results`: no seat to sell).
``opportunity_cost``
    ``V_{t0+1}(x0) - V_{t0+1}(x0 - A_j)``; ``+inf`` when product j cannot be sold from x0.

The optimal policy (``result.policy``, a :class:`~rmkit.results.StatePolicy`; not exported)
------------------------------------------------------------------------------------------
``bits``
    uint8 ``(T - t0, n_states, ceil(n/8))``: bit ``j % 8`` of byte ``j // 8`` is 1 iff accepting
    product j in period ``t0 + k`` at flat state s is optimal (feasible and
    ``f_j >= V_{t+1}(x) - V_{t+1}(x - A_j)``, ties accept). Empty (no period) when
    ``keep_decisions=False``.
``strides``
    int64 ``(n_legs,)`` row-major strides over ``(c_0+1, ..., c_{m-1}+1)`` of the network's FULL
    capacities: ``s = sum_i x_i * stride_i``.
``values``
    float64 ``(n_states,)``: ``V_{t0}`` over the whole grid.

Choice demand (:mod:`rmkit.model.choice`) is solved by the choice DP of
:mod:`rmkit.methods.shared.choice_dp` (Liu & van Ryzin 2008): the decision bits are then the
optimal offer set of every state, replayed by the same ``decisions`` control; problems above
``max_work`` subsets x states x periods are refused up front.

Problems whose estimated memory exceeds ``max_memory_gb`` are refused up front
(:class:`rmkit.errors.ProblemTooLargeError`); :meth:`ExactDP.accepts` gives the same reason so
comparisons can skip the method.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.errors import ProblemTooLargeError
from rmkit.methods.base import Param, Problem, SolveOutput, Solver, Tags, positive_float, register
from rmkit.methods.shared import choice_dp
from rmkit.methods.shared.network_dp import (
    DEFAULT_MAX_MEMORY_GB,
    flat_index,
    marginal_values,
    solve_network_dp,
    too_large_reason,
)
from rmkit.model.demand import DemandModel
from rmkit.model.network import Network
from rmkit.results import StatePolicy


def _is_bool(v: Any) -> bool:
    return isinstance(v, bool)


@register
class ExactDP(Solver):
    """Exact network DP by backward induction (Talluri & van Ryzin 2004, section 3.1); under
    choice demand the DP over offer sets (Liu & van Ryzin 2008)."""

    name = "exact"
    tags = Tags(exact=True, upper_bound=False, small_state_space=True, control="decisions",
                reference=True)
    citation = (
        "K. T. Talluri and G. J. van Ryzin (2004), The Theory and Practice of Revenue "
        "Management, Springer, sec. 3.1 (the network dynamic program); Q. Liu and G. van "
        "Ryzin (2008), On the choice-based linear programming model for network revenue "
        "management, MSOM 10(2):288-310 (the DP under choice demand)"
    )
    demand_kinds = ("independent", "choice")
    refusal = ProblemTooLargeError
    value_only_settings = {"keep_decisions": False}  # the decision table is the policy's alone
    params = {
        "max_memory_gb": Param(DEFAULT_MAX_MEMORY_GB, "a number of GiB > 0", positive_float),
        "keep_decisions": Param(True, "True or False", _is_bool),
        "max_work": Param(choice_dp.DEFAULT_MAX_WORK, "a number > 0 (choice demand: offer "
                          "sets x states x periods)", positive_float),
    }

    def accepts(self, network: Network, demand: DemandModel) -> str | None:
        params = self._checked_params()
        if demand.kind == "choice":
            return choice_dp.too_large_reason(
                network, demand, demand.n_periods, float(params["max_memory_gb"]),
                params["keep_decisions"], float(params["max_work"]))
        return too_large_reason(
            network, demand.n_periods, float(params["max_memory_gb"]), params["keep_decisions"]
        )

    def marginal_values(self, network: Network, demand: DemandModel, periods: np.ndarray,
                        states: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        params = self._checked_params()
        if demand.kind == "choice":
            return marginal_values(network, demand, periods, states,
                                   float(params["max_memory_gb"]),
                                   solve=choice_dp.solve_choice_dp)
        return marginal_values(network, demand, periods, states, float(params["max_memory_gb"]))

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        if problem.demand.kind == "choice":
            dp = choice_dp.solve_choice_dp(
                problem.network, problem.demand, problem.period,
                keep_decisions=params["keep_decisions"],
                max_memory_gb=float(params["max_memory_gb"]), max_work=float(params["max_work"]),
            )
        else:
            dp = solve_network_dp(
                problem.network,
                problem.demand,
                problem.period,
                keep_decisions=params["keep_decisions"],
                max_memory_gb=float(params["max_memory_gb"]),
            )
        x0 = problem.capacity
        n_bytes = (problem.network.n_products + 7) // 8
        bits = (dp.decision_bits if dp.decision_bits is not None
                else np.zeros((0, dp.values.size, n_bytes), dtype=np.uint8))
        return SolveOutput(
            variables={
                "value": np.float64(dp.values[flat_index(x0, dp.strides)]),
                "bid_price": dp.bid_prices_at(x0),
                "opportunity_cost": dp.opportunity_costs_at(x0),
            },
            policy=StatePolicy(bits, dp.strides, problem.period, dp.values),
        )
