"""The yardstick of gaps: the optimum where a method gives it, else the lowest upper bound.

The lowest bound is chosen by its value; a sampled bound (``ir``, ``ph``) is chosen by its sample
mean, which picks the luckiest of several noisy bounds (a small optimistic bias when two bounds are
within a standard error of each other; the gap's interval still carries the chosen bound's error).

Which methods give an optimum or a bound is a fact of their tags (``exact``, ``upper_bound``,
``reference``: cheap and sure enough to solve as a yardstick); nothing here names a method.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass, field

import numpy as np

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
    #: A sampled bound's per-path values and the seed of its request streams (path k of
    #: ``demand.sample_arrivals(K, seed)``), when the method keeps them: the gap of a policy
    #: simulated with the same seed is then estimated paired
    #: (:func:`rmkit.workflows.stats.gap_estimate`).
    path_values: np.ndarray | None = field(default=None, compare=False, repr=False)
    seed: int | None = None

    def paths_for(self, seed: int) -> np.ndarray | None:
        """The per-path values when they were drawn on the streams of ``seed``, else None."""
        if self.path_values is None or self.seed is None or int(self.seed) != int(seed):
            return None
        return self.path_values

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
    payload = result.payload or {}
    paths, seed = None, None
    if result.period == 0 and "paths_seed" in payload and "path_values" in payload:
        paths = np.asarray(payload["path_values"], dtype=np.float64)
        seed = int(payload["paths_seed"])
    return Reference("best bound", solver.name, result.value, result.stderr or 0.0,
                     path_values=paths, seed=seed)


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
