"""The independent-demand view: any independent-demand method run on another demand kind.

A method written for independent demand (``dlp``, ``lr``, ``emsrb``, ``davn``, ``exact``, ...)
runs on a choice scenario when the scenario's demand is first *approximated* by independent
demand, explicitly, in one of two ways (``approximation``):

``"all_offered"``
    product j is requested with its sale probability when every product is offered,
    ``demand.sale_probabilities(None)`` (any demand kind has it);
``"first_choice"``
    each segment asks only for its most preferred product, bought with probability
    ``v / (v_0 + v)`` (a choice-demand fact, :meth:`ChoiceDemand.first_choice_probabilities`).

The method then solves that independent model and its control is simulated against the true
customers, who still choose among what is offered. What the gap to a choice method costs is the
price of ignoring choice: an independent-demand method sees sales of the cheap products that are
really buy-down of customers who would pay more, protects too little, and its re-estimated
demand spirals down (Cooper, Homem-de-Mello & Kleywegt 2006, "Models of the spiral-down effect in
revenue management", Operations Research 54(5):968-987).

The view is one wrapper, named in the method name: ``get_solver("dlp:independent")`` (or
``IndependentView("dlp", approximation="first_choice", dual="min")``). Its result's ``method`` is
``"dlp:independent"``, its ``parameters`` include ``approximation``, its message opens with
"assumes independent demand" and ``payload["assumes_independent_demand"]`` names the
approximation; its tags drop ``exact``/``upper_bound`` (a bound on the approximation is none on
the real problem), say heuristic and carry ``assumes_independent_demand`` (the approximation), so
``compare``, ``simulate`` and ``sweep`` label its rows "assumes independent demand"
(:func:`rmkit.methods.base.assumption_of`).
"""

from __future__ import annotations

import dataclasses
from typing import Any

from rmkit.errors import InputError
from rmkit.methods.base import Param, Solver, Tags, one_of, register_view
from rmkit.model.demand import DemandModel, demand_kinds
from rmkit.model.independent import IndependentDemand
from rmkit.model.network import Network
from rmkit.results import BookingState, SolveResult

#: ``"<method>" + SUFFIX`` names the view of a method.
SUFFIX = ":independent"
APPROXIMATIONS = ("all_offered", "first_choice")
APPROXIMATION_PARAM = Param("all_offered", "one of " + ", ".join(repr(a) for a in APPROXIMATIONS),
                            one_of(*APPROXIMATIONS))
CITATION = (
    "W. L. Cooper, T. Homem-de-Mello and A. J. Kleywegt (2006), Models of the spiral-down effect "
    "in revenue management, Operations Research 54(5):968-987 (what assuming independent demand "
    "costs); the wrapped method cites its own paper"
)


def independent_demand(demand: DemandModel, approximation: str = "all_offered"
                       ) -> IndependentDemand:
    """The independent-demand approximation of ``demand`` (the identity on independent demand)."""
    if isinstance(demand, IndependentDemand):
        return demand
    if approximation == "all_offered":
        return IndependentDemand(demand.sale_probabilities(None, 0))
    first = getattr(demand, "first_choice_probabilities", None)
    if approximation != "first_choice" or first is None:
        raise InputError(f"approximation: {approximation!r} is not available for "
                         f"{demand.kind!r} demand; use 'all_offered'")
    return IndependentDemand(first())


class IndependentView(Solver):
    """An independent-demand method on any demand kind, through an explicit approximation
    (module docstring; Cooper, Homem-de-Mello & Kleywegt 2006)."""

    citation = CITATION

    def __init__(self, method: str | Solver, **settings: Any) -> None:
        from rmkit.methods.base import get_solver

        inner_settings = {k: v for k, v in settings.items() if k != "approximation"}
        inner = (get_solver(method, **inner_settings) if isinstance(method, str)
                 else type(method)(**{**method.get_params(), **inner_settings}))
        if "independent" not in inner.demand_kinds:
            raise InputError(f"method: {inner.name} does not solve independent demand, so it has "
                             "no independent-demand view; run it directly")
        self.inner = inner
        super().__init__(**settings)

    # facts derived from the wrapped method (properties, so the view pickles as its settings)
    @property  # type: ignore[override]
    def name(self) -> str:  # type: ignore[override]
        return self.inner.name + SUFFIX

    @property  # type: ignore[override]
    def params(self) -> dict[str, Param]:  # type: ignore[override]
        return {**self.inner.params, "approximation": APPROXIMATION_PARAM}

    @property  # type: ignore[override]
    def tags(self) -> Tags:  # type: ignore[override]
        approximation = self._settings.get("approximation", APPROXIMATION_PARAM.default)
        return dataclasses.replace(self.inner.tags, exact=False, upper_bound=False,
                                   heuristic=True, reference=False,
                                   assumes_independent_demand=str(approximation))

    @property  # type: ignore[override]
    def demand_kinds(self) -> tuple[str, ...]:  # type: ignore[override]
        return tuple(demand_kinds())

    def __repr__(self) -> str:
        args = ", ".join([repr(self.inner.name)] + [f"{k}={v!r}" for k, v in
                                                     self._settings.items()])
        return f"IndependentView({args})"

    def __reduce__(self):
        return (_rebuild, (self.inner.name, dict(self._settings)))

    def _view(self, demand: DemandModel) -> IndependentDemand:
        return independent_demand(demand, self._checked_params()["approximation"])

    def accepts(self, network: Network, demand: DemandModel) -> str | None:
        return self.inner.accepts(network, self._view(demand))

    def marginal_values(self, network, demand, periods, states):
        return self.inner.marginal_values(network, self._view(demand), periods, states)

    def solve(self, network: Network, demand: DemandModel, *, state: BookingState | None = None,
              seed: int | None = None) -> SolveResult:
        params = self._checked_params()
        approximation = params["approximation"]
        res = self.inner.solve(network, self._view(demand), state=state, seed=seed)
        note = f"assumes independent demand (approximation={approximation!r})"
        return dataclasses.replace(
            res, method=self.name, parameters=params,
            message="; ".join(m for m in (note, res.message) if m),
            payload={**res.payload, "assumes_independent_demand": approximation},
        )


def _rebuild(method: str, settings: dict[str, Any]) -> IndependentView:
    return IndependentView(method, **settings)


def view_from_name(name: str, settings: dict[str, Any]) -> IndependentView | None:
    """The view named ``"<method>:independent"``, or ``None`` for other names."""
    if not name.endswith(SUFFIX):
        return None
    return IndependentView(name[: -len(SUFFIX)], **settings)


register_view(SUFFIX.lstrip(":"), lambda method, settings: IndependentView(method, **settings))
