"""CDLP: the choice-based deterministic LP, its leg duals as bid prices, its sets as a policy.

Gallego, Iyengar, Phillips & Dubey (2004), "Managing flexible products on a network", CORC
technical report TR-2004-01, Columbia University; Liu & van Ryzin (2008), "On the choice-based
linear programming model for network revenue management", MSOM 10(2):288-310; solved by column
generation with the pricing MIP and greedy heuristic of Bront, Mendez-Diaz & Vulcano (2009), "A
column generation algorithm for choice-based network revenue management", Operations Research
57(3):769-784. The program and its solution are in :mod:`rmkit.methods.shared.cdlp`.

The value is an upper bound on the optimal expected revenue to go (Liu & van Ryzin 2008, Prop. 2),
when the pricing is exact (``pricing="auto"``, ``"mip"`` or ``"enumerate"``). ``cdlp`` applies the leg duals
as static bid prices (``bid_price`` control: offer j iff its fare covers its legs' duals);
``cdlp-sets`` applies the primal, offering each set S for h(S) periods (``cdlp_sets`` control,
:func:`rmkit.methods.shared.cdlp.schedule`). Both re-solve from the state when the simulator asks.

Result variables: ``value``, ``bid_price`` (leg duals). ``payload``: ``time_dual`` (per epoch),
``offer_sets`` (bool, sets with h > 0), ``offer_hours``, ``offer_schedule`` (set of each period,
``len(offer_sets)`` = none), ``columns``, ``iterations``.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.methods.base import (
    Param,
    Problem,
    SolveOutput,
    Solver,
    Tags,
    one_of,
    positive_int,
    register,
)
from rmkit.methods.shared.cdlp import (
    COLUMN_CHOICES,
    MAX_ALL_PRODUCTS,
    PRICING_CHOICES,
    schedule,
    solve_cdlp,
)
from rmkit.methods.shared.network_lp import raise_or_warn
from rmkit.methods.shared.offer_sets import component_refusal
from rmkit.model.demand import DemandModel
from rmkit.model.network import Network

CITATION = (
    "G. Gallego, G. Iyengar, R. Phillips and A. Dubey (2004), Managing flexible products on a "
    "network, CORC TR-2004-01; Q. Liu and G. van Ryzin (2008), On the choice-based linear "
    "programming model for network revenue management, MSOM 10(2):288-310; J. J. Miranda "
    "Bront, I. Mendez-Diaz and G. Vulcano (2009), A column generation algorithm for "
    "choice-based network revenue management, Operations Research 57(3):769-784"
)


def _rule(choices: tuple[str, ...]) -> str:
    return "one of " + ", ".join(repr(c) for c in choices)


@register
class ChoiceDeterministicLP(Solver):
    """Choice-based deterministic LP (Gallego et al. 2004; Liu & van Ryzin 2008) by column
    generation (Bront, Mendez-Diaz & Vulcano 2009); leg duals as bid prices."""

    name = "cdlp"
    tags = Tags(upper_bound=True, control="bid_price", reference=True)
    citation = CITATION
    demand_kinds = ("choice",)
    params = {
        "pricing": Param("auto", _rule(PRICING_CHOICES), one_of(*PRICING_CHOICES)),
        "columns": Param("generate", _rule(COLUMN_CHOICES), one_of(*COLUMN_CHOICES)),
        "max_iterations": Param(1000, "a whole number >= 1", positive_int),
    }

    def accepts(self, network: Network, demand: DemandModel) -> str | None:
        params = self._checked_params()
        if params["columns"] == "all" and network.n_products > MAX_ALL_PRODUCTS:
            return (f"columns='all' enumerates 2**{network.n_products} offer sets, above "
                    f"2**{MAX_ALL_PRODUCTS}; use columns='generate'")
        if params["pricing"] == "enumerate":
            return component_refusal(demand)  # type: ignore[arg-type]
        return None

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        sol = solve_cdlp(problem.network, problem.demand, problem.period,  # type: ignore[arg-type]
                         problem.capacity, pricing=params["pricing"], columns=params["columns"],
                         max_iterations=params["max_iterations"])
        raise_or_warn(self.name, sol.status, sol.message)
        return SolveOutput(
            variables={"value": np.float64(sol.value), "bid_price": sol.leg_duals},
            status=sol.status,
            message=sol.message,
            payload={
                "time_dual": sol.time_duals,
                "offer_sets": sol.sets,
                "offer_hours": sol.hours,
                "offer_schedule": schedule(sol),
                "columns": sol.n_columns,
                "iterations": sol.iterations,
            },
        )


@register
class ChoiceDeterministicLPSets(ChoiceDeterministicLP):
    """CDLP (Liu & van Ryzin 2008; Bront et al. 2009) applied through its primal: each offer set
    for as many periods as the LP gives it."""

    name = "cdlp-sets"
    tags = Tags(upper_bound=True, control="cdlp_sets")
