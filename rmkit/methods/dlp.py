"""DLP: the deterministic linear program and its leg duals as bid prices.

From period t with remaining capacity x, demand is replaced by its expected value to come
``mu = E[D(t)]`` (Talluri & van Ryzin 2004, section 3.3.1; Williamson 1992):

.. math::

    \\mathrm{DLP}(t, x) = \\max_y f^\\top y \\quad \\text{s.t.} \\quad A y \\le x,
    \\quad 0 \\le y \\le \\mu.

By Jensen's inequality the optimal value bounds the optimal expected revenue to go from above,
``V_t(x) <= DLP(t, x)`` (Talluri & van Ryzin 2004, section 3.3.1). The leg duals are the bid
prices; which dual is returned when the program is degenerate is the ``dual`` setting (see
:mod:`rmkit.methods.shared.network_lp`) and is stated in the result message. The model is one HiGHS
program per network (:class:`rmkit.methods.shared.network_lp.NetworkLP`); the simulator can hold one and
re-solve it warm.

Reference: K. T. Talluri and G. J. van Ryzin (2004), *The Theory and Practice of Revenue
Management*, Springer, section 3.3.1; E. L. Williamson (1992), *Airline Network Seat Inventory
Control: Methodologies and Revenue Impacts*, PhD thesis, MIT.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.methods.base import Param, Problem, SolveOutput, Solver, Tags, one_of, register
from rmkit.methods.shared.network_lp import DUAL_CHOICES, raise_or_warn, time_limit_ok

DUAL_RULE = "one of " + ", ".join(repr(c) for c in DUAL_CHOICES)
TIME_LIMIT_RULE = "None or a number of seconds > 0"


def dual_message(choice: str) -> str:
    """The sentence each LP-based result carries about its leg duals."""
    return {
        "highs": "leg duals: the optimal dual as HiGHS returns it (dual='highs')",
        "min": "leg duals: smallest sum over the optimal dual face (dual='min')",
        "max": "leg duals: largest sum over the optimal dual face, capped at leg fares (dual='max')",
    }[choice]


def leg_duals(problem: Problem, dual: str = "highs") -> np.ndarray:
    """DLP leg duals at the problem's state (the displacement prices dpd and lr start from)."""
    return leg_duals_many([problem], dual)[0]


def leg_duals_many(problems: list[Problem], dual: str = "highs") -> np.ndarray:
    """``(S, L)`` DLP leg duals at many states of one network: one model, each solve cold, so
    every row equals :func:`leg_duals` of its state."""
    from rmkit.methods.shared.network_lp import NetworkLP

    model = NetworkLP(problems[0].network, dual=dual)
    out = np.empty((len(problems), problems[0].network.n_legs))
    for s, problem in enumerate(problems):
        sol = model.solve(problem.capacity, problem.demand_to_come, cold=True)
        raise_or_warn("dlp", sol.status, sol.message)
        out[s] = sol.bid_price
    return out


@register
class DeterministicLP(Solver):
    """Deterministic linear program (Talluri & van Ryzin 2004; Williamson 1992); leg duals."""

    name = "dlp"
    tags = Tags(upper_bound=True, control="bid_price", reference=True)
    citation = (
        "K. T. Talluri and G. J. van Ryzin (2004), The Theory and Practice of Revenue "
        "Management, Springer, sec. 3.3.1; E. L. Williamson (1992), Airline Network Seat "
        "Inventory Control: Methodologies and Revenue Impacts, PhD thesis, MIT"
    )
    params = {
        "dual": Param("highs", DUAL_RULE, one_of(*DUAL_CHOICES)),
        "time_limit": Param(None, TIME_LIMIT_RULE, time_limit_ok),
    }

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        from rmkit.methods.shared.network_lp import NetworkLP

        model = NetworkLP(problem.network, dual=params["dual"], time_limit=params["time_limit"])
        sol = model.solve(problem.capacity, problem.demand_to_come)
        raise_or_warn(self.name, sol.status, sol.message)
        message = "; ".join(m for m in (dual_message(params["dual"]), sol.message) if m)
        return SolveOutput(
            variables={
                "value": np.float64(sol.value),
                "bid_price": sol.bid_price,
                "allocation": sol.allocation,
            },
            status=sol.status,
            message=message,
            payload={"dual": sol.dual, "iterations": sol.iterations},
        )
