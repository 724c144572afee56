"""Compare methods value by value: bounds, bid prices, simulated revenue, and errors against the optimum.

:func:`compare` runs every requested method on one scenario and stacks what they give along a
``method`` dim of one ``xarray.Dataset`` (``join="exact"``, so mismatched labels fail loudly):

* the value of each method (the optimum for ``exact``, an upper bound for ``dlp``, ``lr``, ``ph``
  ..., the method's own estimate for heuristics) with its standard error when it is sampled;
* its bid prices at the start (``bid_price``, over ``leg``) and, for capacity- and
  time-dependent methods, the whole table (``bid_price_table``, over ``period``, ``capacity``,
  ``leg``; conventions of :mod:`rmkit.results`);
* the simulated revenue of its booking policy on the same request streams for every method
  (common random numbers), with the 95% interval and the paired difference against the best
  policy (:mod:`rmkit.workflows.simulate`);
* where the exact DP fits, the error of its bid prices against the exact marginal values where
  the optimal policy actually goes (below), and the revenue gap to the optimum in percent (to the
  best upper bound otherwise).

The certified gap
-----------------
Every simulated policy's ``gap_percent`` is measured against the tightest yardstick computed
(:func:`rmkit.workflows.reference.best_reference`): the exact optimum where it fits (asked for or
solved in the background), else the lowest of the upper bounds that ran. Its 95% interval
(``gap_percent_ci_low`` / ``_high``, standard error ``gap_percent_stderr``) combines the policy's
sampling error with the bound's when the bound is sampled (:func:`rmkit.workflows.stats.
gap_estimate`): *paired* when the bound kept its per-path values on the simulator's request
streams of the same seed (``ir`` and ``ph`` do; every method is solved and simulated with the
comparison's seed), so the covariance of bound and revenue over the shared paths is subtracted;
``sqrt(se_policy^2 + se_bound^2)`` otherwise. The attr ``gap_pairing`` says which. Since every
bound is above the optimum, ``gap_percent_ci_high`` is a 95% upper confidence limit on how far
the policy is from optimal: the certified gap.

Value-by-value errors
---------------------
Let ``V_t`` be the exact value function. At period t and seats left x the exact bid price of leg
i is ``m_i(t, x) = V_{t+1}(x) - V_{t+1}(x - e_i)`` and the opportunity cost of product j is
``o_j(t, x) = V_{t+1}(x) - V_{t+1}(x - A_j)`` (Talluri & van Ryzin 2004, section 3.1). A method
quotes ``b_i(t, x)``: its table entry at ``(t, x_i)`` for capacity- and time-dependent methods, its
vector solved at the start of the horizon for static ones (no re-solve), and prices a product at
``sum_i A_ij b_i(t, x)``. Let ``w(t, x)`` be the share of (path, period) pairs in which the optimal
policy, simulated on the first ``visit_paths`` request streams, starts period t in state x. Then

    bid_price_error_mean = sum_{t,x} w(t,x) sum_{i: x_i >= 1} |b_i - m_i|
                           / sum_{t,x} w(t,x) #{i: x_i >= 1}
    bid_price_error_max  = max over visited (t, x) and legs with x_i >= 1 of |b_i - m_i|

and the same with products that can be sold at x (``x >= A_j``) for the opportunity costs. Errors
in states the optimal policy never reaches do not count. The exact values at the visited states
come from one more backward pass that records ``V_{t+1}`` at those states and their neighbours
(:func:`rmkit.methods.shared.network_dp.solve_network_dp` with ``probe``).

Independent verification
------------------------
Whoever produced them, every allocation and every simulated path is re-checked against the
network (:mod:`rmkit.workflows.verification`); the ``check`` variable says ``ok`` or what failed.
"""

from __future__ import annotations

import json
import math
import time
import warnings
from collections.abc import Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from rmkit._version import __version__
from rmkit.errors import InputError, SolverError
from rmkit.methods.base import kind_of
from rmkit.model.demand import DemandModel, check_compatible
from rmkit.model.network import Network
from rmkit.results import SolveResult
from rmkit.workflows.compiling import CompileWatch
from rmkit.workflows.progress import Progress, part
from rmkit.workflows.reference import Reference, best_reference
from rmkit.workflows.verification import check_allocation, check_paths
from rmkit.workflows.visits import (
    Visits,
    exact_bid_price_table,
    policy_visits,
    quoted_bid_prices,
    visit_weighted_errors,
)
from rmkit.workflows.warnings_log import counts

if TYPE_CHECKING:  # pragma: no cover
    import xarray as xr

    from rmkit.methods.base import Solver

DEFAULT_PATHS = 500
DEFAULT_VISIT_PATHS = 200

KINDS = ("optimum", "upper bound", "heuristic")
ERROR_NAMES = (
    "bid_price_error_mean",
    "bid_price_error_max",
    "opportunity_cost_error_mean",
    "opportunity_cost_error_max",
)


# ---------------------------------------------------------------- methods
@dataclass
class MethodRun:
    """One method's fate in a comparison: what it is, whether it ran, and what it gave."""

    name: str
    kind: str
    status: str  # "ran", "skipped" or "failed"
    reason: str = ""
    solver: Solver | None = None
    result: SolveResult | None = None
    simulation: Any = None  # xarray.Dataset from rmkit.workflows.simulate.simulate
    simulate_seconds: float = math.nan
    compile_seconds: float = 0.0
    check: str = ""
    warnings: list[str] = field(default_factory=list)

    def note(self) -> str:
        """The warnings raised while solving or simulating, counted (one line)."""
        from rmkit.workflows.warnings_log import summary

        return summary(self.warnings)


def select_methods(methods: Sequence[str] | str | None) -> list[str]:
    """Method names to run (default: every registered one); an unknown name lists the valid ones.

    A view of a method (``"dlp:independent"``, :func:`rmkit.methods.base.register_view`) is a
    method name too."""
    from rmkit.methods.base import VIEWS, is_method_name, load_all

    registry = load_all()
    if methods is None:
        return sorted(name for name, cls in registry.items() if cls.by_default)
    if isinstance(methods, str):
        methods = [m.strip() for m in methods.split(",") if m.strip()]
    names = list(dict.fromkeys(methods))
    if not names:
        raise InputError("methods: the list is empty; give at least one method name")
    for name in names:
        if not is_method_name(name):
            raise InputError(
                f"methods: unknown method {name!r}; valid methods: {', '.join(sorted(registry))}"
                + "".join(f"; views: '<method>:{v}'" for v in sorted(VIEWS))
            )
    return names


def run_methods(
    network: Network,
    demand: DemandModel,
    names: Sequence[str],
    *,
    seed: int,
    settings: Mapping[str, Mapping[str, Any]] | None = None,
    progress: Progress | None = None,
) -> list[MethodRun]:
    """Solve every method from period 0 at full capacity; skip (with the reason) what cannot run.

    ``progress`` hears ``(what, done, total)`` in solves; kernel compilation is timed apart
    (``compile_seconds``) and kept out of the solve time."""
    from rmkit.errors import ProblemTooLargeError
    from rmkit.methods.base import get_solver

    settings = dict(settings or {})
    unknown = sorted(set(settings) - set(names))
    if unknown:
        raise InputError(
            f"settings: given for {unknown[0]!r}, which is not among the methods compared "
            f"({', '.join(names)})"
        )
    # a bad setting is the user's error: refuse it before any method runs
    solvers = {name: get_solver(name, **dict(settings.get(name, {}))) for name in names}
    for solver in solvers.values():
        solver.check_params()
    runs = []
    for k, name in enumerate(names):
        solver = solvers[name]
        run = MethodRun(name=name, kind=kind_of(solver), status="ran", solver=solver)
        reason = solver.refusal_reason(network, demand)
        if reason is not None:
            run.status, run.reason = "skipped", reason
            runs.append(run)
            continue
        if progress:
            progress(f"solving {name}", k, len(names))
        try:
            with _collect(run), CompileWatch() as compiling:
                run.result = _without(solver.solve(network, demand, seed=seed), compiling.seconds)
            run.compile_seconds += compiling.seconds
        except ProblemTooLargeError as err:
            run.status, run.reason = "skipped", str(err)
        except (SolverError, InputError) as err:
            run.status, run.reason = "failed", str(err)
        if run.result is not None and run.result.status in ("error", "infeasible"):
            run.status = "failed"
            run.reason = f"status {run.result.status}: {run.result.message}"
        runs.append(run)
    return runs


def _without(result: SolveResult, compile_seconds: float) -> SolveResult:
    """The result with the kernel compilation taken out of its solve time."""
    if not compile_seconds:
        return result
    from dataclasses import replace

    return replace(result, seconds=max(result.seconds - compile_seconds, 0.0))


@contextmanager
def _collect(run: MethodRun) -> Iterator[None]:
    """Keep a method's warnings on its record (one line each) instead of flooding the output."""
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            yield
        finally:
            run.warnings.extend(str(w.message).splitlines()[0] for w in caught)


# ---------------------------------------------------------------- simulation
def simulate_runs(
    network: Network,
    demand: DemandModel,
    runs: Sequence[MethodRun],
    *,
    paths: int,
    seed: int,
    resolve: int,
    progress: Progress | None = None,
) -> None:
    """Simulate the policy of every method that ran and gives one, on the same request streams."""
    from rmkit.controls import get_control
    from rmkit.workflows.progress import part
    from rmkit.workflows.simulate import simulate

    todo = [r for r in runs
            if r.status == "ran" and r.result is not None and r.solver.tags.control]
    for k, run in enumerate(todo):
        # Solved once from the start: replay that result (no second solve); else re-solve. A
        # control the simulator never re-solves (stored decisions, alp's period table) is the
        # result's too, whatever ``resolve`` says.
        own = run.solver.policy_resolves() > 1  # a policy defined with its own re-solves
        fixed = resolve <= 1 or not get_control(run.solver.tags.control).adaptive
        policy = run.result if fixed and not own else run.solver
        started = time.perf_counter()
        try:
            with warnings.catch_warnings():  # counted in the simulation's attrs instead
                warnings.simplefilter("ignore")
                run.simulation = simulate(network, demand, policy, paths=paths, seed=seed,
                                          resolve=resolve,
                                          progress=part(progress, f"simulating {run.name}", k,
                                                        len(todo)))
        except (SolverError, InputError) as err:
            run.status, run.reason = "failed", f"simulation: {err}"
            continue
        for text, n in json.loads(run.simulation.attrs.get("warnings", "{}")).items():
            run.warnings.extend([text] * n)
        compiled = float(run.simulation.attrs.get("compile_seconds", 0.0))
        run.compile_seconds += compiled
        run.simulate_seconds = time.perf_counter() - started - compiled


# ---------------------------------------------------------------- the comparison
@dataclass
class _Frame:
    """Shared facts while the Dataset is assembled."""

    network: Network
    demand: DemandModel
    paths: int
    visits: Visits | None = None
    exact_leg: np.ndarray | None = None
    exact_cost: np.ndarray | None = None
    errors_note: str = ""
    best: str = ""
    reference: Reference = field(default_factory=Reference.none)
    seed: int = 0
    pairing: str = ""
    extra: dict[str, Any] = field(default_factory=dict)


def compare(
    network: Network,
    demand: DemandModel,
    *,
    methods: Sequence[str] | str | None = None,
    paths: int = DEFAULT_PATHS,
    resolve: int = 0,
    seed: int = 0,
    settings: Mapping[str, Mapping[str, Any]] | None = None,
    visit_paths: int = DEFAULT_VISIT_PATHS,
    with_exact: bool = True,
    scenario: str = "",
    progress: Progress | None = None,
) -> xr.Dataset:
    """Run methods on one scenario and compare them value by value; see the module docstring.

    Parameters
    ----------
    methods
        Method names (a list or ``"a,b,c"``); default every registered method. Methods that cannot
        run on this scenario are kept in the result with ``status = "skipped"`` and the reason.
    paths, seed
        Simulated request streams (the same for every policy) and their seed; solvers get
        ``seed`` too.
    resolve
        Re-solves of each policy at equally spaced periods (0: solve once at the start).
    settings
        Method name -> its settings.
    visit_paths
        How many of the streams estimate the optimal policy's visit distribution.
    with_exact
        When ``exact`` is not among ``methods`` but fits, still solve it as the yardstick of the
        errors and gaps (it is then not a row of the result).
    progress
        ``progress(what, done, total)`` callback (:mod:`rmkit.workflows.progress`): the solves
        are the first third of the run, the simulations the rest.

    Returns
    -------
    xarray.Dataset
        Dims ``method``, ``leg``, ``product``, ``period``, ``capacity``, ``path`` and ``visit``;
        variables are listed in :data:`VARIABLES`. Coordinates along ``method``: ``kind``,
        ``control`` and ``assumes_independent_demand`` (the approximation of a method run
        through the independent-demand view, e.g. ``"all_offered"``; ``""`` otherwise). Attrs:
        scenario, seed, paths, resolve, parameters of every method (JSON), reference, best
        policy, rmkit version.
    """
    from rmkit.limits import MAX_SEED, whole_rule
    from rmkit.methods.base import non_negative_int, positive_int

    check_compatible(network, demand)
    for name, value, rule, ok in (
        ("paths", paths, "a whole number >= 1", positive_int),
        ("seed", seed, whole_rule(0, MAX_SEED), lambda v: non_negative_int(v) and v <= MAX_SEED),
        ("resolve", resolve, "a whole number >= 0", non_negative_int),
        ("visit_paths", visit_paths, "a whole number >= 1", positive_int),
    ):
        if not ok(value):
            from rmkit.errors import param_error

            raise param_error("compare", name, rule, value)
    demand.check_sample_size(paths)  # before any solve: the paths must fit in memory
    names = select_methods(methods)
    _check_table_size(network, demand, len(names))
    runs = run_methods(network, demand, names, seed=seed, settings=settings,
                       progress=part(progress, "", 0, 3))
    for run in runs:
        if run.result is not None:
            run.check = check_allocation(network, run.result)
    simulate_runs(network, demand, runs, paths=paths, seed=seed, resolve=resolve,
                  progress=_scaled(progress, 1, 2, 3))
    for run in runs:
        if run.simulation is not None:
            verdict = check_paths(network, run.simulation)
            run.check = verdict if run.check in ("", "ok") else run.check
    for run in runs:
        if run.check not in ("", "ok"):
            warnings.warn(f"{run.name}: failed the independent check: {run.check}",
                          RuntimeWarning, stacklevel=2)
    frame = _Frame(network, demand, paths, seed=int(seed))
    exact = next((r for r in runs if r.status == "ran" and r.kind == "optimum"), None)
    if exact is None and with_exact:
        exact = _background_exact(network, demand, seed, progress)
    if exact is not None:
        if progress:
            progress("exact values where the optimal policy goes", 3, 3)
        _exact_errors(frame, exact, min(visit_paths, paths), seed)
    frame.reference = best_reference((r.solver, r.result) for r in [*runs, exact]
                                     if r is not None and r.status == "ran" and r.result is not None)
    frame.best = _best_policy(runs)
    ds = _assemble(frame, runs)
    ds.attrs.update(
        {
            "scenario": scenario or network.name,
            "seed": int(seed),
            "paths": int(paths),
            "resolve": int(resolve),
            "visit_paths": int(frame.visits.n_paths) if frame.visits is not None else 0,
            "methods": json.dumps(names),
            "parameters": json.dumps(
                {r.name: r.solver.get_params() for r in runs if r.solver is not None},
                sort_keys=True, default=str),
            "reference_kind": frame.reference.kind,
            "reference_method": frame.reference.method,
            "reference_value": float(frame.reference.value),
            "reference_stderr": float(frame.reference.stderr),
            "gap_pairing": frame.pairing,
            "best_policy": frame.best,
            "errors": frame.errors_note,
            "confidence": 0.95,
            "warnings": json.dumps({r.name: counts(r.warnings) for r in runs if r.warnings}),
            "rmkit_version": __version__,
        }
    )
    return ds


def _scaled(progress: Progress | None, start: float, width: float, total: float
            ) -> Progress | None:
    """Progress of a phase that covers ``[start, start + width]`` of ``total``."""
    if progress is None:
        return None

    def report(what: str, done: float, count: float) -> None:
        progress(what, start + width * (done / count if count else 0.0), total)

    return report


def _exact_errors(frame: _Frame, exact: MethodRun, visit_paths: int, seed: int) -> None:
    from rmkit.errors import ProblemTooLargeError

    net, dem = frame.network, frame.demand
    try:
        visits = policy_visits(net, dem, exact.result, dem.sample_arrivals(visit_paths, seed))
        leg, cost = exact.solver.marginal_values(net, dem, visits.period, visits.state)
    except (ProblemTooLargeError, SolverError) as err:
        frame.errors_note = f"not computed: {err}"
        return
    frame.visits, frame.exact_leg, frame.exact_cost = visits, leg, cost
    frame.errors_note = (
        f"visit-weighted over {visits.size} (period, state) pairs the optimal policy visits on "
        f"{visit_paths} simulated paths; static bid prices as solved at period 0"
    )


def _background_exact(network: Network, demand: DemandModel, seed: int,
                      progress: Progress | None) -> MethodRun | None:
    """A registered method that gives the optimum, as the yardstick when it fits but was not
    asked for (it is not a row of the table)."""
    from rmkit.errors import ProblemTooLargeError
    from rmkit.methods.base import load_all

    for name, cls in sorted(load_all().items()):
        solver = cls()
        if not (solver.tags.exact and solver.tags.reference):
            continue
        if solver.refusal_reason(network, demand) is not None:
            continue
        if progress:
            progress(f"solving {name} (the yardstick)", 3, 3)
        try:
            result = solver.solve(network, demand, seed=seed)
        except (ProblemTooLargeError, SolverError):
            continue
        return MethodRun(name=name, kind="optimum", status="ran", solver=solver, result=result)
    return None


def _best_policy(runs: Sequence[MethodRun]) -> str:
    simulated = [r for r in runs if r.simulation is not None]
    if not simulated:
        return ""
    return max(simulated, key=lambda r: float(r.simulation["revenue_mean"])).name


#: Variables of the comparison Dataset along ``method`` (names, core dims and units in
#: :mod:`rmkit.schema`); ``kind`` is a coordinate along ``method``.
VARIABLES = (
    "status", "reason", "check", "warning", "value", "value_stderr", "bid_price", "bid_price_table",
    "revenue", "revenue_mean", "revenue_stderr", "revenue_ci_low", "revenue_ci_high",
    "difference_mean", "difference_stderr", "difference_ci_low", "difference_ci_high",
    "gap_percent", "gap_percent_stderr", "gap_percent_ci_low", "gap_percent_ci_high",
    *ERROR_NAMES, "load_factor_mean", "solve_seconds", "simulate_seconds",
    "compile_seconds",
)


def _check_table_size(network: Network, demand: DemandModel, n_methods: int) -> None:
    """Refuse before any solve a comparison whose bid-price tables (one per method, by period and
    seats left, plus the stacked copy) would not fit in memory."""
    from rmkit.limits import check_memory

    cells = demand.n_periods * (network.max_capacity + 1) * network.n_legs
    check_memory(2 * 8 * n_methods * cells,
                 f"the bid-price tables of {n_methods} methods x {demand.n_periods:,} periods x "
                 f"capacity up to {network.max_capacity:,} x {network.n_legs} legs", "capacity",
                 advice="compare on a network with fewer seats per leg")


def _method_dataset(frame: _Frame, run: MethodRun, best: MethodRun | None):
    from rmkit import schema
    from rmkit.workflows.stats import gap_estimate, paired_differences

    net, n_t = frame.network, frame.demand.n_periods
    m, width = net.n_legs, net.max_capacity + 1
    nan = math.nan
    res, sim = run.result, run.simulation
    data: dict[str, Any] = {name: nan for name in VARIABLES}
    data.update({
        "status": run.status, "reason": run.reason, "check": run.check, "warning": run.note(),
        "value": res.value if res is not None else nan,
        "value_stderr": (res.stderr if res is not None and res.stderr is not None else nan),
        "bid_price": np.full(m, nan),
        "bid_price_table": np.full((n_t, width, m), nan),
        "revenue": np.full(frame.paths, nan),
        "load_factor_mean": np.full(m, nan),
        "solve_seconds": res.seconds if res is not None else nan,
        "simulate_seconds": run.simulate_seconds,
        "compile_seconds": run.compile_seconds,
    })
    if res is not None and run.solver.tags.gives_bid_prices:
        if "bid_price_table" in res:
            data["bid_price_table"] = np.asarray(res["bid_price_table"], dtype=np.float64)
        data["bid_price"] = np.asarray(res.bid_prices, dtype=np.float64)
    if run.kind == "optimum" and frame.visits is not None:
        data["bid_price_table"] = exact_bid_price_table(frame.visits, frame.exact_leg, net, n_t)
        start = frame.visits.period == 0
        data["bid_price"] = frame.exact_leg[np.flatnonzero(start)[0]]
    if sim is not None:
        revenue = sim["revenue"].values
        data["revenue"] = revenue
        data["load_factor_mean"] = sim["load_factor_mean"].values
        for name in ("revenue_mean", "revenue_stderr", "revenue_ci_low", "revenue_ci_high"):
            data[name] = float(sim[name])
        if best is not None:
            d = paired_differences(revenue[None, :], best.simulation["revenue"].values[None, :])
            data.update(difference_mean=d.mean[0, 0], difference_stderr=d.stderr[0, 0],
                        difference_ci_low=d.ci_low[0, 0], difference_ci_high=d.ci_high[0, 0])
        ref = frame.reference
        if math.isfinite(ref.value) and ref.value:
            g = gap_estimate(revenue, ref.value, ref.stderr, ref.paths_for(frame.seed))
            data.update(gap_percent=g.percent, gap_percent_stderr=g.percent_stderr,
                        gap_percent_ci_low=g.percent_ci_low, gap_percent_ci_high=g.percent_ci_high)
            frame.pairing = g.pairing if not g.common_paths else (
                f"paired on {g.common_paths} common request streams")
    if frame.visits is not None and res is not None and run.solver.tags.gives_bid_prices:
        if run.kind == "optimum":
            errors = visit_weighted_errors(frame.visits, net.incidence, frame.exact_leg,
                                           frame.exact_cost, frame.exact_leg, frame.exact_cost)
        else:
            errors = visit_weighted_errors(frame.visits, net.incidence, frame.exact_leg,
                                           frame.exact_cost, quoted_bid_prices(res, frame.visits))
        data.update(errors)
    return schema.dataset(data, coords=_coords(net, n_t, frame.paths))


def _coords(network: Network, n_periods: int, paths: int) -> dict[str, Any]:
    return {
        "leg": np.array(network.leg_ids, dtype=object),
        "product": np.array(network.product_ids, dtype=object),
        "period": np.arange(n_periods),
        "capacity": np.arange(network.max_capacity + 1),
        "path": np.arange(paths),
    }


def _assemble(frame: _Frame, runs: Sequence[MethodRun]):
    import xarray as xr

    from rmkit import schema

    best = next((r for r in runs if r.name == frame.best), None)
    parts = [_method_dataset(frame, r, best) for r in runs]
    ds = xr.concat(parts, dim="method", join="exact", data_vars="all", coords="minimal",
                   compat="identical")
    ds = ds.assign_coords(method=np.array([r.name for r in runs], dtype=object),
                          kind=("method", np.array([r.kind for r in runs], dtype=object)),
                          control=("method", np.array(
                              [r.solver.tags.control if r.solver is not None else ""
                               for r in runs], dtype=object)),
                          assumes_independent_demand=("method", np.array(
                              [r.solver.tags.assumes_independent_demand
                               if r.solver is not None else "" for r in runs], dtype=object)),
                          leg_name=("leg", np.array([leg.name or leg.id
                                                     for leg in frame.network.legs],
                                                    dtype=object)))
    if frame.visits is not None:
        v = frame.visits
        visit_vars = {
            "visit_period": v.period.astype(np.int32),
            "visit_capacity": v.state.astype(np.int32),
            "visit_weight": v.weight,
            "exact_bid_price": v_inf_to_nan(frame.exact_leg),
            "exact_opportunity_cost": v_inf_to_nan(frame.exact_cost),
            "exact_bid_price_table": exact_bid_price_table(v, frame.exact_leg, frame.network,
                                                           frame.demand.n_periods),
        }
        for name, values in visit_vars.items():
            ds[name] = schema.variable(name, values)
    for name, var in ds.data_vars.items():  # compressed when written to NetCDF
        if var.ndim and var.dtype.kind in "fi":
            ds[name].encoding.update({"zlib": True, "complevel": 4})
    return ds


def v_inf_to_nan(a: np.ndarray) -> np.ndarray:
    """Infinite exact differences (no seat there) stored as NaN in the per-visit arrays."""
    return np.where(np.isfinite(a), a, np.nan)
