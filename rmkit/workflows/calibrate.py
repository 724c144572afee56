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
import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from rmkit.errors import InputError
from rmkit.methods.base import Search, Solver
from rmkit.model.demand import DemandModel, check_compatible
from rmkit.model.network import Network
from rmkit.workflows.progress import Progress
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
                f"ranges: {name}: choices must be among {', '.join(tunable.choices)} (comma "
                f"separated), got {text!r}"
            )
        return "choice", tuple(picks)
    lo_text, sep, hi_text = text.partition(":")
    try:
        lo = float(lo_text)
        hi = float(hi_text) if sep else lo
    except ValueError:
        raise InputError(f"ranges: {name}: expected LO:HI numbers, got {text!r}") from None
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo > hi or lo < 0:
        raise InputError(f"ranges: {name}: needs 0 <= LO <= HI, got {text!r}")
    if tunable.kind == "integer":
        if lo != round(lo) or hi != round(hi):
            raise InputError(f"ranges: {name}: needs whole numbers LO:HI, got {text!r}")
        n = int(hi) - int(lo) + 1
        grid = np.unique(np.round(np.linspace(lo, hi, min(n, MAX_GRID))).astype(int))
        return "choice", tuple(int(v) for v in grid)
    if lo == hi:
        return "choice", (lo,)
    return "continuous", (lo, hi)


@dataclass(eq=False)
class Evaluation:
    setting: dict[str, Any]
    mean: float
    stderr: float
    revenue: np.ndarray = field(repr=False)


@dataclass
class Calibration:
    """What the search found; :meth:`to_dataset` is what :func:`calibrate` returns."""

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

    def to_dataset(self):
        """The search as a Dataset along ``setting`` (every setting tried, in order).

        Variables: ``revenue_mean`` and ``revenue_stderr`` on the search paths; for the default
        and the tuned setting ``fresh_revenue_mean``, ``fresh_revenue_stderr`` and
        ``fresh_gap_percent`` on fresh paths (NaN for the others); the paired fresh-path
        ``improvement_*`` of tuned over default. Coordinates: one per setting name (its value
        in each setting tried) and ``label``. Attrs: ``default_setting`` and ``tuned_setting``
        (indices along ``setting``), the heuristic, paths, seeds, the searched ranges (JSON) and
        the reference the gaps are measured against.
        """
        from rmkit import schema
        from rmkit._version import __version__
        from rmkit.workflows.stats import summarize

        trail = list(self.trail)
        for ev in (self.default, self.tuned):
            if not any(ev is x for x in trail):
                trail.append(ev)

        def index(ev: Evaluation) -> int:
            return next(q for q, x in enumerate(trail) if x is ev)

        k = len(trail)
        fresh_mean, fresh_se, fresh_gap = np.full(k, np.nan), np.full(k, np.nan), np.full(k, np.nan)
        value = self.reference.value
        for ev, fresh in ((self.default, self.default_fresh), (self.tuned, self.tuned_fresh)):
            q = index(ev)
            fresh_mean[q], fresh_se[q] = fresh.mean, fresh.stderr
            if math.isfinite(value) and value:
                fresh_gap[q] = 100.0 * (value - fresh.mean) / value
        imp = summarize(self.tuned_fresh.revenue - self.default_fresh.revenue)
        names = sorted({name for ev in trail for name in ev.setting})
        coords: dict[str, Any] = {"setting": np.arange(k), "label": ("setting", np.array(
            [_label(ev.setting, self.searched) for ev in trail], dtype=object))}
        for name in names:
            coords[name] = ("setting", np.array([ev.setting.get(name) for ev in trail],
                                                dtype=object))
        ds = schema.dataset({"revenue_mean": [ev.mean for ev in trail],
                             "revenue_stderr": [ev.stderr for ev in trail],
                             "fresh_revenue_mean": fresh_mean,
                             "fresh_revenue_stderr": fresh_se,
                             "fresh_gap_percent": fresh_gap}, lead=("setting",), coords=coords)
        for name, v in (("improvement_mean", imp.mean), ("improvement_stderr", imp.stderr),
                        ("improvement_ci_low", imp.ci_low), ("improvement_ci_high", imp.ci_high)):
            ds[name] = schema.variable(name, v)
        ds.attrs.update({
            "heuristic": self.heuristic, "paths": int(self.paths), "seed": int(self.seed),
            "fresh_seed": int(self.fresh_seed),
            "searched": json.dumps({n: list(v) if isinstance(v, tuple) else v
                                    for n, v in self.searched.items()}, default=str),
            "default_setting": index(self.default), "tuned_setting": index(self.tuned),
            "evaluations": len(self.trail),
            "reference_kind": self.reference.kind, "reference_method": self.reference.method,
            "reference_value": float(self.reference.value), "rmkit_version": __version__,
        })
        return ds


def _label(setting: dict[str, Any], searched: dict[str, Any]) -> str:
    return ", ".join(f"{k}={v:.4g}" if isinstance(v, float) else f"{k}={v}"
                     for k, v in setting.items() if k in searched) or "default"


def _python(v: Any) -> Any:
    return v.item() if isinstance(v, np.generic) else v


def calibration_report(ds) -> dict[str, Any]:
    """The JSON object of a calibration Dataset (what the calibrate command prints as JSON)."""
    names = [n for n in ds.coords if n not in ("setting", "label")]

    def setting(q: int) -> dict[str, Any]:
        return {n: _python(ds[n].values[q]) for n in names if ds[n].values[q] is not None}

    def row(q: int) -> dict[str, Any]:
        gap = float(ds["fresh_gap_percent"].values[q])
        return {"setting": setting(q), "revenue": float(ds["revenue_mean"].values[q]),
                "stderr": float(ds["revenue_stderr"].values[q]),
                "fresh_revenue": float(ds["fresh_revenue_mean"].values[q]),
                "fresh_stderr": float(ds["fresh_revenue_stderr"].values[q]),
                "fresh_gap_percent": gap if math.isfinite(gap) else None}

    a = ds.attrs
    n_trail = int(a["evaluations"])
    return {
        "heuristic": a["heuristic"], "paths": a["paths"], "seed": a["seed"],
        "fresh_seed": a["fresh_seed"], "searched": json.loads(a["searched"]),
        "default": row(int(a["default_setting"])), "tuned": row(int(a["tuned_setting"])),
        "improvement_fresh": {"mean": float(ds["improvement_mean"]),
                              "stderr": float(ds["improvement_stderr"]),
                              "ci_low": float(ds["improvement_ci_low"]),
                              "ci_high": float(ds["improvement_ci_high"])},
        "reference": {"kind": a["reference_kind"], "method": a["reference_method"],
                      "value": a["reference_value"]},
        "evaluations": n_trail,
        "trail": [{"setting": setting(q), "revenue": float(ds["revenue_mean"].values[q]),
                   "stderr": float(ds["revenue_stderr"].values[q])} for q in range(n_trail)],
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
        return self.controls_at(network, demand, [(period, capacity)], [seed])[0]

    def controls_at(self, network, demand, states, seeds):
        results = self.inner.controls_at(network, demand, states, seeds)
        return [self.control.scaled(r, self.multiplier) for r in results]

    def summary(self) -> str:
        return self.inner.summary()


class _Objective:
    """Mean revenue of a setting on fixed streams; every setting evaluated once."""

    def __init__(self, network, demand, heuristic, fixed, paths, seed, settings=None,
                 progress=None, planned=1):
        self.network, self.demand, self.heuristic = network, demand, heuristic
        self.fixed, self.paths, self.seed = dict(fixed), paths, seed
        self.settings = dict(settings or {})  # method settings held fixed, not searched
        self.progress, self.planned = progress, planned
        self.cache: dict[tuple, Evaluation] = {}
        self.trail: list[Evaluation] = []

    def __call__(self, setting: Mapping[str, Any], seed: int | None = None) -> Evaluation:
        full = {**self.fixed, **setting}
        seed = self.seed if seed is None else seed
        key = (seed, tuple(sorted(full.items())))
        if key not in self.cache:
            if self.progress is not None:
                done = len(self.cache)
                self.progress(f"setting {done + 1} of about {max(self.planned, done + 1)}", done,
                              max(self.planned, done + 1))
            ev = self._run(full, seed)
            self.cache[key] = ev
            if seed == self.seed:
                self.trail.append(ev)
        return self.cache[key]

    def _run(self, setting: dict[str, Any], seed: int) -> Evaluation:
        from rmkit.methods.base import get_solver
        from rmkit.workflows.policies import SolverPolicy
        from rmkit.workflows.simulate import simulate

        settings = {**self.settings, **{k: v for k, v in setting.items() if k != "resolve"}}
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
    settings: Mapping[str, Any] | None = None,
    progress: Progress | None = None,
):
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
    settings
        Method settings held fixed during the search (not searched).
    progress
        ``progress(what, done, total)`` callback, told before each new evaluation.
    reference
        Also solve the yardstick (:func:`rmkit.workflows.reference.solve_reference`: the optimum
        where it fits, else the best deterministic upper bound) to report against.

    Returns
    -------
    xarray.Dataset
        The search along ``setting`` (see :meth:`Calibration.to_dataset`);
        :func:`calibration_report` turns it into the command's JSON.
    """
    from rmkit.limits import MAX_SEED, check_seed
    from rmkit.methods.base import get_solver, positive_int

    check_compatible(network, demand)
    solver = get_solver(heuristic)
    if not solver.tags.control:
        raise InputError(f"heuristic: {heuristic!r} is a bound without a booking control; "
                         "pick a method with bid prices, booking limits or decisions")
    if not positive_int(paths):
        raise InputError(f"paths: must be a whole number >= 1, got {paths!r}")
    seed = check_seed(seed, "seed")
    # the fresh paths' seed, checked now rather than after the search (wraps past the range)
    fresh = (seed + 1) % (MAX_SEED + 1) if fresh_seed is None else check_seed(fresh_seed,
                                                                               "fresh_seed")
    if not ranges:
        raise InputError(f"ranges: give at least one setting to tune; valid for {heuristic}: "
                         f"{', '.join(tunable_names(solver))}")
    searchable = tunables(solver)
    valid = list(searchable)
    searched: dict[str, Any] = {}
    continuous: dict[str, tuple[float, float]] = {}
    discrete: dict[str, tuple] = {}
    for name, text in ranges.items():
        if name not in valid:
            raise InputError(f"ranges: {heuristic} has no tunable setting {name!r}; valid "
                             f"settings: {', '.join(valid)}")
        kind, values = parse_range(name, text, searchable[name])
        (continuous if kind == "continuous" else discrete)[name] = values
        searched[name] = values
    default_setting = {"resolve": int(resolve)}
    if "multiplier" in valid:
        default_setting["multiplier"] = 1.0
    fixed = dict(settings or {})
    clash = sorted(set(fixed) & set(searched))
    if clash:
        raise InputError(f"settings: {clash[0]!r} is both held fixed and searched; drop one")
    get_solver(heuristic, **fixed)  # unknown names are refused before any work
    for name in valid:
        if name in solver.params:
            default_setting[name] = fixed.pop(name, solver.params[name].default)
    grid = math.prod(len(v) for v in discrete.values())
    planned = 1 + grid * (COARSE_POINTS + 12 if continuous else 1) + 2
    objective = _Objective(network, demand, heuristic, default_setting, paths, seed, fixed,
                           progress, planned)
    default = objective({})
    best: Evaluation | None = None  # the best setting within the searched ranges
    for combo in itertools.product(*discrete.values()):
        point = dict(zip(discrete, combo, strict=True))
        ev = _best_continuous(objective, point, continuous) if continuous else objective(point)
        if best is None or ev.mean > best.mean:
            best = ev
    assert best is not None
    ref = solve_reference(network, demand, seed) if reference else Reference.none()
    found = Calibration(
        heuristic=heuristic, paths=int(paths), seed=int(seed), fresh_seed=fresh,
        searched=searched, default=default, tuned=best,
        default_fresh=objective({}, seed=fresh),
        tuned_fresh=objective({k: v for k, v in best.setting.items()}, seed=fresh),
        reference=ref, trail=list(objective.trail),
    )
    return found.to_dataset()


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
