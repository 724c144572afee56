"""Booking policies for the simulator: where a control's results come from.

A policy is a *source* of results: asked about a booking state (period t, seats left x), it
returns the :class:`~rmkit.results.SolveResult` its control (:mod:`rmkit.controls`) applies
there. Three sources:

* :class:`SolverPolicy` wraps a registered method (``dlp``, ``lr``, ``exact``, ``davn`` ...) and
  solves it from each state it is asked about; the method's ``tags.control`` names the control.
* :class:`FixedPolicy` applies one result already computed (from period 0) and never re-solves.
* :class:`NoSolvePolicy` applies a control that needs no result (first come, first served).

What re-solving means is a fact of the control (``adaptive``, ``sale_sensitive``, ``memory``;
:mod:`rmkit.controls.base`), never of its name.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np

from rmkit.controls import get_control, load_controls
from rmkit.controls.base import Control
from rmkit.errors import InputError
from rmkit.model.demand import DemandModel
from rmkit.model.network import Network
from rmkit.results import BookingState, SolveResult


class PolicySource(Protocol):
    """What the simulator needs from a policy."""

    label: str
    control: type[Control]
    parameters: dict[str, Any]

    @property
    def resolvable(self) -> bool: ...

    def control_at(
        self, network: Network, demand: DemandModel, period: int, capacity: np.ndarray, seed: int
    ) -> SolveResult | None: ...

    def controls_at(self, network: Network, demand: DemandModel,
                    states: list[tuple[int, np.ndarray]], seeds: list[int]
                    ) -> list[SolveResult | None]: ...

    def summary(self) -> str: ...


class _OneByOne:
    """Sources without batch solves answer ``controls_at`` state by state."""

    def controls_at(self, network, demand, states, seeds):
        return [self.control_at(network, demand, period, capacity, seed)
                for (period, capacity), seed in zip(states, seeds, strict=True)]

    def summary(self) -> str:
        return ""


@dataclass
class NoSolvePolicy(_OneByOne):
    """A control that needs no result (``needs_result`` is False), e.g. first come, first served."""

    control: type[Control]
    label: str = ""
    parameters: dict[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        self.label = self.label or self.control.name

    @property
    def resolvable(self) -> bool:
        return False

    def control_at(self, network, demand, period, capacity, seed) -> None:
        return None


@dataclass
class SolverPolicy:
    """A registered method, solved from every booking state the simulator asks about."""

    solver: Any
    label: str = ""

    def __post_init__(self) -> None:
        from rmkit.methods.base import ResolveSession

        self.label = self.label or self.solver.name
        self.session = ResolveSession()
        if not self.solver.tags.control:
            raise InputError(
                f"policy: {self.solver.name!r} is a bound without a booking control; pick a "
                "method that gives bid prices, booking limits or decisions"
            )
        self.control = get_control(self.solver.tags.control)

    @property
    def resolvable(self) -> bool:
        return True

    @property
    def parameters(self) -> dict[str, Any]:
        return self.solver.get_params()

    @property
    def min_resolves(self) -> int:
        """Re-solves the method's policy is defined with (:meth:`Solver.policy_resolves`)."""
        return int(self.solver.policy_resolves())

    def control_at(self, network, demand, period, capacity, seed) -> SolveResult:
        return self.controls_at(network, demand, [(period, capacity)], [seed])[0]

    def controls_at(self, network, demand, states, seeds) -> list[SolveResult]:
        """The method re-solved from every state at once (:meth:`Solver.resolve`), sharing what
        it keeps between the re-solves of this run."""
        booking = [BookingState(period=int(t), capacity=tuple(int(v) for v in x))
                   for t, x in states]
        return self.solver.resolve(network, demand, booking, seeds, self.session)

    def summary(self) -> str:
        return self.solver.resolve_summary(self.session)


@dataclass
class FixedPolicy(_OneByOne):
    """One precomputed result (solved from period 0), applied for the whole horizon.

    ``control`` defaults to the registered method's ``tags.control`` when ``result.method`` is
    registered, else to the first control whose arrays the result holds.
    """

    result: SolveResult
    control: type[Control] | str | None = None
    label: str = ""

    def __post_init__(self) -> None:
        self.label = self.label or self.result.method
        if isinstance(self.control, str):
            self.control = get_control(self.control)
        self.control = self.control or infer_control(self.result)
        if self.result.period != 0:
            raise InputError(
                f"policy: a fixed result must be solved from period 0 to cover the horizon, got "
                f"one solved from period {self.result.period}; pass the method instead so the "
                "simulator can solve it"
            )

    @property
    def resolvable(self) -> bool:
        return False

    @property
    def parameters(self) -> dict[str, Any]:
        return dict(self.result.parameters)

    def control_at(self, network, demand, period, capacity, seed) -> SolveResult:
        return self.result


def assumption(source: Any) -> str:
    """The independent-demand approximation a policy source was solved on (``""``: none): the
    view's tag (:mod:`rmkit.methods.independent_view`), or the mark on a result it gave."""
    solver = getattr(source, "solver", None)
    if solver is not None:
        return str(solver.tags.assumes_independent_demand)
    result = getattr(source, "result", None)
    if isinstance(result, SolveResult):
        return str(result.payload.get("assumes_independent_demand", ""))
    return ""


def infer_control(result: SolveResult) -> type[Control]:
    """The control a result supports: its method's tag (a registered method, or a view of one,
    whose control is the wrapped method's), else what its arrays allow."""
    from rmkit.methods.base import get_solver, is_method_name

    if is_method_name(result.method):  # a registered method or a view of one (dlp:independent)
        return get_control(get_solver(result.method).tags.control)
    for control in load_controls().values():
        if control.needs_result and control.drives(result):
            return control
    raise InputError(
        f"policy: result of {result.method!r} holds nothing a booking control applies (bid "
        "prices, a bid-price table, booking limits with buckets, or stored decisions)"
    )


def make_policy(policy: Any, params: dict[str, Any] | None = None) -> PolicySource:
    """A policy source from a method or control name, a solver instance, a result or a source."""
    from rmkit.methods.base import Solver, get_solver, is_method_name, load_all

    params = dict(params or {})
    if isinstance(policy, str):
        controls = load_controls()
        if not is_method_name(policy) and policy not in policy_names():
            raise InputError(f"policy: unknown policy {policy!r}; valid policies: "
                             f"{', '.join(policy_names())} (see 'rmkit methods')")
        if policy not in load_all() and policy in controls and not controls[policy].needs_result:
            if params:
                raise InputError(f"params: {policy!r} takes no parameters, got {sorted(params)}")
            return NoSolvePolicy(controls[policy])
        return SolverPolicy(get_solver(policy, **params))
    if params:
        raise InputError("params: only apply to a policy given by name; set them on the object")
    if isinstance(policy, Solver):
        return SolverPolicy(policy)
    if isinstance(policy, SolveResult):
        return FixedPolicy(policy)
    if all(hasattr(policy, a) for a in ("label", "control", "resolvable", "control_at")):
        return policy
    raise InputError(
        f"policy: expected a method name, a Solver, a SolveResult or a policy source, got "
        f"{type(policy).__name__}"
    )


def policy_names() -> list[str]:
    """Names ``simulate`` accepts: controls that need no solve, then every registered method
    with a booking control."""
    from rmkit.methods.base import load_all

    plain = sorted(n for n, c in load_controls().items() if not c.needs_result)
    return plain + sorted(n for n, s in load_all().items() if s.tags.control)
