"""Tune a production heuristic's settings for simulated revenue, and check the tuning holds up.

The objective is the heuristic's mean simulated revenue ``R(theta)`` on one fixed set of request
streams (common random numbers, so every setting ``theta`` faces the same requests and ``R`` is a
deterministic function of ``theta``). Discrete settings (fare basis, displacement iterations,
DAVN buckets, number of re-optimisations, demand law) are searched on a grid; a continuous one
(the multiplier on the heuristic's bid prices) is searched on a coarse grid and refined with
scipy's bounded scalar minimiser (Brent's method) inside the best grid cell, or with bounded
Nelder-Mead when there are several.

A setting picked as the best of many on one sample looks better on that sample than it is
(optimisation bias, the "winner's curse"). So the report gives the tuned and the default setting's
revenue again on a *fresh* set of streams drawn with another seed, with the paired difference and
its 95% interval, beside the exact optimum (small networks) or the best upper bound. Only the
fresh-sample figures are an honest estimate of what tuning buys.

Tunable settings
----------------
What may be searched is a fact of the method and its control, never a list kept here: every
method setting whose ``Param`` carries a ``Search`` (fare basis, displacement iterations, DAVN
buckets, demand law ...), plus two settings of the policy: ``resolve`` (the number of equally
spaced re-optimisations, whole numbers ``LO:HI``) and ``multiplier`` (on the bid prices of a
control that applies them, ``LO:HI`` with ``0 <= LO < HI``; a method's own ``multiplier`` setting
is used when it has one, else its results are scaled). Whole-number ranges are searched on a grid
of at most :data:`MAX_GRID` points; choices are given as ``a,b``.
"""

from __future__ import annotations

import itertools
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from rmkit.errors import InputError
from rmkit.methods.base import Search, Solver
from rmkit.model.demand import DemandModel, check_compatible
from rmkit.model.network import Network
from rmkit.workflows.reference import Reference, solve_reference

#: Most points of an integer grid (evenly spaced, ends included, when the range is wider).
MAX_GRID = 11
#: Points of the coarse grid a continuous setting starts from.
COARSE_POINTS = 9


#: Settings of the policy rather than of the method: how often it is re-solved, and a multiplier on
#: the bid prices of a control that applies them (``Control.scalable``).
RESOLVE = Search("integer", "re-optimisations during the horizon")
MULTIPLIER = Search("continuous", "multiplier on the bid prices")


def tunables(solver: Solver) -> dict[str, Search]:
    """Settings of ``solver``'s policy that calibration can search, and how."""
    from rmkit.controls import get_control

    found = {"resolve": RESOLVE}
    if get_control(solver.tags.control).scalable:
        found["multiplier"] = MULTIPLIER
    found.update({name: p.search for name, p in solver.params.items() if p.search is not None})
    return dict(sorted(found.items()))


def tunable_names(solver: Solver) -> list[str]:
    return list(tunables(solver))


def parse_range(name: str, text: str, tunable: Search) -> tuple[str, Any]:
    """``LO:HI`` for numbers, ``a,b`` for choices; a single value fixes the setting."""
    text = str(text).strip()
    if tunable.kind == "choice":
        picks = [c.strip() for c in text.split(",") if c.strip()]
        bad = [c for c in picks if c not in tunable.choices]
        if not picks or bad:
            raise InputError(
                f"--param {name}: choices must be among {', '.join(tunable.choices)} (comma "
                f"separated), got {text!r}"
            )
        return "choice", tuple(picks)
    lo_text, sep, hi_text = text.partition(":")
    try:
        lo = float(lo_text)
        hi = float(hi_text) if sep else lo
    except ValueError:
        raise InputError(f"--param {name}: expected LO:HI numbers, got {text!r}") from None
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo > hi or lo < 0:
        raise InputError(f"--param {name}: needs 0 <= LO <= HI, got {text!r}")
    if tunable.kind == "integer":
        if lo != round(lo) or hi != round(hi):
            raise InputError(f"--param {name}: needs whole numbers LO:HI, got {text!r}")
        n = int(hi) - int(lo) + 1
        grid = np.unique(np.round(np.linspace(lo, hi, min(n, MAX_GRID))).astype(int))
        return "choice", tuple(int(v) for v in grid)
    if lo == hi:
        return "choice", (lo,)
    return "continuous", (lo, hi)


@dataclass
class Evaluation:
    setting: dict[str, Any]
    mean: float
    stderr: float
    revenue: np.ndarray = field(repr=False)


@dataclass
class Calibration:
    """What :func:`calibrate` found; :meth:`to_dict` is the JSON the command prints."""

    heuristic: str
    paths: int
    seed: int
    fresh_seed: int
    searched: dict[str, Any]
    default: Evaluation
    tuned: Evaluation
    default_fresh: Evaluation
    tuned_fresh: Evaluation
    reference: Reference
    trail: list[Evaluation]

    def improvement_fresh(self) -> tuple[float, float, float, float]:
        """Paired tuned - default revenue on the fresh streams: mean, stderr, 95% interval."""
        from rmkit.workflows.simulate import summarize

        return summarize(self.tuned_fresh.revenue - self.default_fresh.revenue)

    def to_dict(self) -> dict[str, Any]:
        mean, se, lo, hi = self.improvement_fresh()
        kind, method, value = self.reference.kind, self.reference.method, self.reference.value

        def row(tuning: Evaluation, fresh: Evaluation) -> dict[str, Any]:
            return {"setting": tuning.setting, "revenue": tuning.mean, "stderr": tuning.stderr,
                    "fresh_revenue": fresh.mean, "fresh_stderr": fresh.stderr,
                    "fresh_gap_percent": 100.0 * (value - fresh.mean) / value
                    if math.isfinite(value) and value else None}

        return {
            "heuristic": self.heuristic,
            "paths": self.paths,
            "seed": self.seed,
            "fresh_seed": self.fresh_seed,
            "searched": {k: list(v) if isinstance(v, tuple) else v
                         for k, v in self.searched.items()},
            "default": row(self.default, self.default_fresh),
            "tuned": row(self.tuned, self.tuned_fresh),
            "improvement_fresh": {"mean": mean, "stderr": se, "ci_low": lo, "ci_high": hi},
            "reference": {"kind": kind, "method": method, "value": value},
            "evaluations": len(self.trail),
            "trail": [{"setting": e.setting, "revenue": e.mean, "stderr": e.stderr}
                      for e in self.trail],
        }


@dataclass
class ScaledPolicy:
    """A method's policy with the bid prices its control applies multiplied by a constant."""

    inner: Any
    multiplier: float
    label: str = ""

    def __post_init__(self) -> None:
        self.label = self.label or f"{self.inner.label} x {self.multiplier:g}"
        if not self.inner.control.scalable:
            raise InputError(f"multiplier: the {self.inner.control.name!r} control of "
                             f"{self.inner.label!r} applies no bid prices to scale")

    @property
    def control(self):
        return self.inner.control

    @property
    def resolvable(self) -> bool:
        return self.inner.resolvable

    @property
    def parameters(self) -> dict[str, Any]:
        return {**self.inner.parameters, "multiplier": self.multiplier}

    def control_at(self, network, demand, period, capacity, seed):
        result = self.inner.control_at(network, demand, period, capacity, seed)
        return self.control.scaled(result, self.multiplier)


class _Objective:
    """Mean revenue of a setting on fixed streams; every setting evaluated once."""

    def __init__(self, network, demand, heuristic, fixed, paths, seed):
        self.network, self.demand, self.heuristic = network, demand, heuristic
        self.fixed, self.paths, self.seed = dict(fixed), paths, seed
        self.cache: dict[tuple, Evaluation] = {}
        self.trail: list[Evaluation] = []

    def __call__(self, setting: Mapping[str, Any], seed: int | None = None) -> Evaluation:
        full = {**self.fixed, **setting}
        seed = self.seed if seed is None else seed
        key = (seed, tuple(sorted(full.items())))
        if key not in self.cache:
            ev = self._run(full, seed)
            self.cache[key] = ev
            if seed == self.seed:
                self.trail.append(ev)
        return self.cache[key]

    def _run(self, setting: dict[str, Any], seed: int) -> Evaluation:
        from rmkit.methods.base import get_solver
        from rmkit.workflows.policies import SolverPolicy
        from rmkit.workflows.simulate import simulate

        settings = {k: v for k, v in setting.items() if k != "resolve"}
        native = get_solver(self.heuristic).params
        multiplier = settings.pop("multiplier", 1.0) if "multiplier" not in native else None
        policy: Any = get_solver(self.heuristic, **settings)
        if multiplier is not None and multiplier != 1.0:
            policy = ScaledPolicy(SolverPolicy(policy), float(multiplier))
        sim = simulate(self.network, self.demand, policy, paths=self.paths, seed=seed,
                       resolve=int(setting.get("resolve", 0)))
        revenue = sim["revenue"].values
        return Evaluation(dict(setting), float(sim["revenue_mean"]),
                          float(sim["revenue_stderr"]), revenue)


def calibrate(
    network: Network,
    demand: DemandModel,
    heuristic: str,
    ranges: Mapping[str, str],
    *,
    paths: int = 500,
    seed: int = 0,
    fresh_seed: int | None = None,
    resolve: int = 0,
    reference: bool = True,
) -> Calibration:
    """Search ``ranges`` (setting name -> ``"LO:HI"`` or ``"a,b"``) for the best mean revenue.

    The tuned setting is the best one within the ranges; the default (the method's own settings,
    multiplier 1) is measured beside it whether or not it lies inside them.

    Parameters
    ----------
    heuristic
        A registered method with a booking control.
    ranges
        Settings to search; the others keep the method's defaults (``resolve`` defaults to
        ``resolve``). Unknown names raise :class:`InputError` listing the valid ones.
    paths, seed
        The fixed request streams of the search.
    fresh_seed
        Seed of the fresh streams the tuned and default settings are re-measured on (default
        ``seed + 1``).
    reference
        Also solve the exact optimum (when it fits) or the best upper bound (dlp, lr) to report
        against.
    """
    from rmkit.methods.base import get_solver, positive_int

    check_compatible(network, demand)
    solver = get_solver(heuristic)
    if not solver.tags.gives_bid_prices:
        raise InputError(f"--heuristic: {heuristic!r} is a bound without a booking control; "
                         "pick a method with bid prices, booking limits or decisions")
    if not positive_int(paths):
        raise InputError(f"--paths: must be a whole number >= 1, got {paths!r}")
    if not ranges:
        raise InputError(f"--param: give at least one setting to tune; valid for {heuristic}: "
                         f"{', '.join(tunable_names(solver))}")
    searchable = tunables(solver)
    valid = list(searchable)
    searched: dict[str, Any] = {}
    continuous: dict[str, tuple[float, float]] = {}
    discrete: dict[str, tuple] = {}
    for name, text in ranges.items():
        if name not in valid:
            raise InputError(f"--param: {heuristic} has no tunable setting {name!r}; valid "
                             f"settings: {', '.join(valid)}")
        kind, values = parse_range(name, text, searchable[name])
        (continuous if kind == "continuous" else discrete)[name] = values
        searched[name] = values
    default_setting = {"resolve": int(resolve)}
    if "multiplier" in valid:
        default_setting["multiplier"] = 1.0
    for name in valid:
        if name in solver.params:
            default_setting[name] = solver.params[name].default
    objective = _Objective(network, demand, heuristic, default_setting, paths, seed)
    default = objective({})
    best: Evaluation | None = None  # the best setting within the searched ranges
    for combo in itertools.product(*discrete.values()):
        point = dict(zip(discrete, combo, strict=True))
        ev = _best_continuous(objective, point, continuous) if continuous else objective(point)
        if best is None or ev.mean > best.mean:
            best = ev
    assert best is not None
    fresh = seed + 1 if fresh_seed is None else int(fresh_seed)
    ref = solve_reference(network, demand, seed) if reference else Reference.none()
    return Calibration(
        heuristic=heuristic, paths=int(paths), seed=int(seed), fresh_seed=fresh,
        searched=searched, default=default, tuned=best,
        default_fresh=objective({}, seed=fresh),
        tuned_fresh=objective({k: v for k, v in best.setting.items()}, seed=fresh),
        reference=ref, trail=list(objective.trail),
    )


def _best_continuous(objective: _Objective, point: dict[str, Any],
                     continuous: Mapping[str, tuple[float, float]]) -> Evaluation:
    """Coarse grid, then scipy refinement within the best cell."""
    from scipy.optimize import minimize, minimize_scalar

    names = list(continuous)
    axes = [np.linspace(lo, hi, COARSE_POINTS if len(names) == 1 else 5)
            for lo, hi in continuous.values()]
    grid = [dict(zip(names, (float(v) for v in vals), strict=True))
            for vals in itertools.product(*axes)]
    best = max((objective({**point, **g}) for g in grid), key=lambda e: e.mean)

    def loss(values: Sequence[float]) -> float:
        return -objective({**point, **dict(zip(names, (float(v) for v in values),
                                               strict=True))}).mean

    if len(names) == 1:
        axis, name = axes[0], names[0]
        k = int(np.argmin(np.abs(axis - best.setting[name])))
        lo, hi = axis[max(k - 1, 0)], axis[min(k + 1, axis.size - 1)]
        minimize_scalar(lambda v: loss([v]), bounds=(lo, hi), method="bounded",
                        options={"xatol": 1e-3 * (axis[-1] - axis[0]), "maxiter": 25})
    else:
        start = [best.setting[n] for n in names]
        minimize(loss, start, method="Nelder-Mead", bounds=list(continuous.values()),
                 options={"maxfev": 40, "xatol": 1e-3, "fatol": 1e-6})
    candidates = [e for e in objective.trail
                  if all(e.setting.get(k) == v for k, v in point.items())
                  and all(n in e.setting for n in names)]
    return max(candidates + [best], key=lambda e: e.mean)
