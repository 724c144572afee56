"""The yardstick of gaps: the optimum where a method gives it, else the lowest upper bound.

Which methods give an optimum or a bound is a fact of their tags (``exact``, ``upper_bound``,
``reference``: cheap and sure enough to solve as a yardstick); nothing here names a method.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass

from rmkit.errors import InputError, ProblemTooLargeError, SolverError
from rmkit.methods.base import Solver, load_all
from rmkit.model.demand import DemandModel
from rmkit.model.network import Network
from rmkit.results import SolveResult


@dataclass(frozen=True)
class Reference:
    """What gaps are measured against: ``kind`` is ``optimum``, ``best bound`` or ``none``."""

    kind: str
    method: str
    value: float
    stderr: float = 0.0

    @staticmethod
    def none() -> Reference:
        return Reference("none", "", math.nan)


def best_reference(results: Iterable[tuple[Solver, SolveResult]]) -> Reference:
    """The optimum among solved results, else the lowest finite upper bound, else none."""
    bounds: list[tuple[Solver, SolveResult]] = []
    for solver, result in results:
        if result.status in ("error", "infeasible") or not math.isfinite(result.value):
            continue
        if solver.tags.exact:
            return Reference("optimum", solver.name, result.value)
        if solver.tags.upper_bound:
            bounds.append((solver, result))
    if not bounds:
        return Reference.none()
    solver, result = min(bounds, key=lambda sr: sr[1].value)
    return Reference("best bound", solver.name, result.value, result.stderr or 0.0)


def solve_reference(network: Network, demand: DemandModel, seed: int) -> Reference:
    """Solve the registered yardstick methods: an exact one where it fits, else every
    deterministic reference bound, and return :func:`best_reference` of what they gave."""
    candidates = [cls() for _, cls in sorted(load_all().items()) if cls.tags.reference]
    exact = [s for s in candidates if s.tags.exact]
    bounds = [s for s in candidates if s.tags.upper_bound and not s.tags.stochastic]
    for group in (exact, bounds):
        solved = []
        for solver in group:
            if solver.refusal_reason(network, demand) is not None:
                continue
            try:
                solved.append((solver, solver.solve(network, demand, seed=seed)))
            except (ProblemTooLargeError, SolverError, InputError):
                continue
        ref = best_reference(solved)
        if ref.kind != "none":
            return ref
    return Reference.none()
