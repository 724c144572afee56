"""LR: Lagrangian relaxation of the network DP into leg DPs (Topaloglu 2009).

Reference: H. Topaloglu (2009), "Using Lagrangian relaxation to compute capacity-dependent bid
prices in network revenue management", *Operations Research* 57(3):637-649.

The relaxation
--------------
Multipliers ``lambda[i, t, j]`` split the fare of product j in period t over the legs it uses,
``sum_{i in j} lambda[i, t, j] = f_j``. Leg i then solves its own single-leg DP in which a
request for j in period t pays ``lambda[i, t, j]``:

.. math::

    v_i(t, x) = v_i(t+1, x) + \\sum_{j \\ni i} p_{tj} \\max(0, \\lambda_{itj}
                - (v_i(t+1, x) - v_i(t+1, x-1))),

and for every split ``V_t(x) <= sum_i v_i(t, x_i)`` (induction on t: accepting j on the network
is feasible on each leg it uses, and a joint maximum is at most the sum of the legs' maxima).
The bound ``L(lambda) = sum_i v_i(t0, x_i)`` is convex and piecewise linear in lambda; its
subgradient is ``q[i, t, j]``, the probability that leg i, following its own optimal policy
from ``x_i`` seats, sells product j in period t. Minimising over ``lambda >= 0`` loses nothing:
a leg never accepts a share ``<= 0``, so raising a negative share to 0 leaves its leg's value
unchanged, and the matching cut in the other legs' shares cannot raise theirs.

The minimisation
----------------
Projected subgradient steps in the metric scaled by ``1 / p[t, j]`` (a fixed change of
variables), with Polyak's step towards a target level chosen by the path-based rule of Goffin
and Kiwiel (1999), "Convergence of a simple subgradient level method", *Mathematical Programming*
85:207-211, which guarantees ``inf_k L(lambda_k) = min L``: the target is the record value less
``delta``; ``delta`` is kept after a sufficient descent and halved when the path since the last
reset exceeds a bound. The target is never set below the certified lower bound below (such a
target is under the minimum anyway, and halving delta lifts it above that bound in time).

A lower bound on ``min L`` certifies progress: for any leg policies with sales probabilities
``q``, ``sum_{t, j} f_j min_{i in j} q[i, t, j] <= min L`` (each leg's value at any split is at
least the revenue of its policy, and the shares of a product add up to its fare). The policies
used are running mixes of the iterates' policies (restarted at iterations 1, 2, 4, 8, ...). The
reported gap is ``(record - lower bound) / record``. The run stops when the gap is at most
``tol`` (status ``optimal``), when the record bound has improved by less than ``stall_tol``
(relative) over the last 100 iterations (status ``optimal_inaccurate``; the message gives the
certified gap), or after ``max_iterations`` (status ``iteration_limit`` plus a warning). The
bound is valid in every case, only less tight.

Start: each fare split over its legs in proportion to the legs' DLP duals at the state (equal
shares where they are all zero). With ``warm_start=True`` the solve also considers the
multipliers of the full-capacity, period-0 solve of the same network and demand objects (solved
once with the same settings and cached by object identity), restricted to the remaining
periods, and starts from whichever of the two gives the lower bound (one extra pass of the leg
DPs). The result is still a function of the inputs alone: it does not depend on which solves
ran before. When the stored multipliers win, the step rule starts with a small level gap.
Measured (benchmarks/bench_decomposition.py): the warm start reaches a bound within 0.1% of the
cold solve's a little sooner (about 70 against 87 iterations on rm_600_8_1.6_8.0 at T/5..4T/5),
but under the default stopping rules it runs as long as a cold solve; for the simulator's many
re-solves, ``warm_start=True, max_iterations=60`` costs about 0.13 of a cold solve there, for a
bound 0.1% (at most 0.25%) above the cold one (status ``iteration_limit``).

The value is the bound; the leg value functions at the best multipliers give capacity- and
time-dependent bid prices ``v_i(t+1, x) - v_i(t+1, x-1)``.
"""

from __future__ import annotations

import math
import warnings
import weakref
from dataclasses import dataclass
from typing import Any

import numpy as np

from rmkit.methods.base import (
    Param,
    Problem,
    SolveOutput,
    Solver,
    Tags,
    positive_float,
    positive_int,
    register,
)
from rmkit.methods.shared.leg_dp import (
    bid_prices_at,
    leg_products,
    leg_tables,
    network_leg_values,
    product_legs,
    value_at,
)
from rmkit.methods.shared.side_by_side import side_by_side
from rmkit.methods.shared.workspace import borrowed
from rmkit.model.network import Network

#: Initial level gap ``delta``: this fraction of the certified gap (cold start), or WARM_LEVEL
#: times the bound (warm start, which begins near the minimum); the path bound is PATH_FACTOR
#: times the first step's length. Any positive values keep the convergence guarantee; these
#: were tuned on the public instances.
LEVEL_FRACTION = 0.1
WARM_LEVEL = 0.002
PATH_FACTOR = 10.0
#: The loop's kernels run leg after leg on the calling thread, without the GIL. One pass over
#: the legs is about a millisecond, less than the cost of waking a thread pool on a busy machine
#: (on the 200-period 4-spoke instance 100 iterations took 0.12 s on one thread against 2.0 s on
#: two, in one run on the shared 2-core machine); the cores serve whole re-solves instead, side
#: by side in threads (``_resolve``).
#: Iterations over which the bound's improvement is measured for the ``stall_tol`` rule.
STALL_WINDOW = 100
#: A simulator's re-solve (``Solver.resolve``) starts from the run's period-0 split and stops
#: when the bid prices at its state have settled (RESOLVE_TOL of the highest fare over
#: RESOLVE_WINDOW iterations) or after RESOLVE_ITERATIONS; see ``benchmarks/bench_resolves.py lr-paired``
#: for the revenue this costs against fully converged re-solves.
RESOLVE_ITERATIONS = 60
RESOLVE_TOL = 1e-3
RESOLVE_WINDOW = 5


def _step_factor_ok(v: object) -> bool:
    return positive_float(v) and float(v) < 2.0  # type: ignore[arg-type]


def non_negative_float(v: object) -> bool:
    return positive_float(v) or (isinstance(v, (int, float)) and not isinstance(v, bool) and v == 0)


def _bool_ok(v: object) -> bool:
    return isinstance(v, bool)


@dataclass(frozen=True)
class LagrangianRun:
    """The outcome of :func:`minimise_bound`."""

    multiplier: np.ndarray | None  # (L, T, n) best split found (None when not kept)
    values: np.ndarray  # (L, T+1, cmax+1) leg values at that split
    bound: float
    lower_bound: float
    bound_history: np.ndarray
    gap_history: np.ndarray
    status: str  # optimal (gap <= tol), optimal_inaccurate (stalled) or iteration_limit


def dual_split(network: Network, duals: np.ndarray, n_periods: int) -> np.ndarray:
    """``(L, T, n)`` multipliers: fares split in proportion to leg duals (equal if all zero)."""
    a = network.incidence.astype(np.float64)
    w = a * np.clip(np.nan_to_num(duals, posinf=0.0), 0.0, None)[:, None]
    total = w.sum(axis=0)
    share = np.where(total > 0, w / np.where(total > 0, total, 1.0), a / a.sum(axis=0))
    lam = share * network.fares[None, :]
    return np.ascontiguousarray(np.broadcast_to(lam[:, None, :], (network.n_legs, n_periods,
                                                                  network.n_products)))


def minimise_bound(
    network: Network,
    prob: np.ndarray,
    capacity: np.ndarray,
    start: np.ndarray,
    *,
    tol: float,
    max_iterations: int,
    step_factor: float,
    stall_tol: float,
    warm: bool = False,
    stable_tol: float = 0.0,
    stable_window: int = 0,
    mix: bool = True,
    keep_multiplier: bool = True,
) -> LagrangianRun:
    """Minimise the Lagrangian bound over fare splits from ``start`` (see the module docstring).

    ``prob`` ``(T, n)`` covers the periods from the state on; ``start`` is ``(L, T, n)``. With
    ``stable_window > 0`` the run also stops (status ``optimal_inaccurate``) once the record
    split's bid prices at the state have moved by at most ``stable_tol`` times the highest fare
    over the last ``stable_window`` iterations: what a policy re-solved at that state uses has
    settled, though the bound may still fall a little. ``keep_multiplier=False`` leaves the
    best split out of the result (a simulator's re-solve reads the leg values only).
    """
    from rmkit.kernels.decomposition import (
        average_and_lower_bound,
        leg_acceptance_each,
        split_direction,
        step_and_project,
    )
    from rmkit.kernels.single_leg import leg_values_each

    prob = np.ascontiguousarray(prob, dtype=np.float64)
    caps = np.ascontiguousarray(network.capacities, dtype=np.int64)
    x = np.ascontiguousarray(capacity, dtype=np.int64)
    fares = np.ascontiguousarray(network.fares)
    legs = product_legs(network)
    with borrowed() as ws:  # the working arrays of the previous solve on this thread
        n_legs, n_periods, n_products = start.shape
        width = network.max_capacity + 1
        # Three buffers of multipliers (current, best, next): a new record is kept by reference and
        # the next iterate written into a free buffer, so no (L, T, n) copy per iteration. Entries
        # the step never writes (single-leg products, p = 0, other legs) are equal in all three.
        buffers = [ws.copy_of(f"split{b}", np.asarray(start, np.float64)) for b in range(3)]
        current = best = 0
        values = ws.empty("values", (n_legs, n_periods + 1, width))
        best_values = ws.empty("best_values", values.shape) if not mix else values
        occupancy = ws.empty("occupancy", values.shape)
        # the kernels read each leg's own products only: a product's multiplier on a leg it does
        # not use is 0 (the split and its projection never write there), and its sales there stay 0
        on_leg = leg_products(network)
        accept = ws.zeros("accept", (n_legs, n_periods, n_products))
        # without a mix nothing is averaged
        average = ws.zeros("average", accept.shape) if mix else accept
        direction = ws.zeros("direction", accept.shape)
        work = np.empty(2 * max(legs.shape[1], 1))
        leg_index = np.arange(n_legs)

        record, lower = math.inf, -math.inf
        bounds: list[float] = []
        gaps: list[float] = []
        # bid prices at the state of the record split, per iteration (for the stability rule)
        below = np.maximum(x - 1, 0)
        seats = x > 0
        settled: list[np.ndarray] = []
        scale = stable_tol * float(fares.max(initial=0.0))
        reference = delta = path_bound = math.nan
        path = 0.0
        restart = 0
        status = "iteration_limit"
        for k in range(max_iterations):
            lam = buffers[current]
            leg_values_each(prob, lam, caps, on_leg, values)
            value = float(values[leg_index, 0, x].sum())
            leg_acceptance_each(prob, lam, caps, x, on_leg, values, occupancy, accept)
            if value < record:
                record, best = value, current
                if not mix:  # the record's own values: no leg pass again at the end
                    np.copyto(best_values, values)
                if stable_window:
                    settled.append(np.where(seats, values[leg_index, 1, x] - values[leg_index, 1, below],
                                            0.0))
            elif stable_window:
                settled.append(settled[-1])
            if k + 1 == 2 * restart or k == 0:  # restart the policy mix at iterations 1, 2, 4, ...
                restart = k + 1
            if mix:
                weight = 1.0 / (k + 2 - restart)
                lower = max(lower, average_and_lower_bound(accept, average, weight, fares, legs))
            gap = (max(record - lower, 0.0) / max(abs(record), 1e-12) if math.isfinite(lower)
                   else math.nan)  # nothing certified yet (no policy mix: certified at the end)
            bounds.append(record)
            gaps.append(gap)
            if gap <= tol:
                status = "optimal"
                break
            if k >= STALL_WINDOW and bounds[k - STALL_WINDOW] - record < stall_tol * abs(record):
                status = "optimal_inaccurate"
                break
            if (stable_window and k >= stable_window
                    and float(np.abs(settled[k] - settled[k - stable_window]).max(initial=0.0))
                    <= scale):
                status = "optimal_inaccurate"
                break
            norm2 = split_direction(prob, accept, legs, direction)
            if norm2 <= 0.0:
                # Every leg of every product sells it with the same probability: this subgradient
                # lies in the normal cone of the split constraints, so lambda is a minimiser (and
                # this policy alone certifies its value).
                lower = record = value
                best = current
                gaps[-1] = 0.0
                bounds[-1] = record
                status = "optimal"
                break
            # Goffin & Kiwiel (1999) path-based target level.
            if k == 0:
                reference = record
                delta = (WARM_LEVEL * abs(record) if warm or not math.isfinite(lower)
                         else LEVEL_FRACTION * (record - lower))
            elif value <= reference - delta / 2:
                reference, path = record, 0.0
            elif path > path_bound:
                reference, path, delta = record, 0.0, delta / 2
            target = max(reference - delta, lower)
            length = step_factor * (value - target) / math.sqrt(norm2)
            if k == 0:
                path_bound = PATH_FACTOR * length
            path += length
            following = next(b for b in range(3) if b not in (current, best))
            step_and_project(lam, direction, step_factor * (value - target) / norm2, fares, legs,
                             prob, work, buffers[following])
            current = following
        if mix:
            leg_values_each(prob, buffers[best], caps, on_leg, values)
            best_values = values
        else:  # the last iterate's policy certifies the gap (weight 1: no mix)
            lower = max(lower, average_and_lower_bound(accept, accept, 1.0, fares, legs))
            gaps[-1] = max(record - lower, 0.0) / max(abs(record), 1e-12)
        return LagrangianRun(
            # the workspace's arrays stay with it: what the run keeps is copied out
            multiplier=buffers[best].copy() if keep_multiplier else None,
            values=best_values.copy(),
            bound=record,
            lower_bound=lower,
            bound_history=np.array(bounds),
            gap_history=np.array(gaps),
            status=status,
        )


def _transposed(multiplier: np.ndarray | None) -> np.ndarray:
    """``(T, L, n)``, the result's layout, of a run's kept ``(L, T, n)`` split."""
    if multiplier is None:
        raise ValueError("the run did not keep its multipliers (keep_multiplier=False)")
    return multiplier.transpose(1, 0, 2)


def _bound_at(network: Network, problem: Problem, lam: np.ndarray) -> float:
    """The Lagrangian bound at the state for the split ``lam`` (one pass of the leg DPs)."""
    values = network_leg_values(problem.probabilities, lam, network)
    return float(value_at(values, problem.capacity).sum())


def _run_settings(params: dict[str, Any]) -> dict[str, Any]:
    keys = ("tol", "max_iterations", "step_factor", "stall_tol")
    return {k: params[k] for k in keys}


# Period-0, full-capacity multipliers per (network, demand, settings), for warm starts. Keyed
# weakly by the objects themselves, so entries go when the network or demand is dropped.
_START_CACHE: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()


@register
class LagrangianRelaxation(Solver):
    """Lagrangian relaxation bound and leg bid-price tables (Topaloglu 2009).

    H. Topaloglu (2009), "Using Lagrangian relaxation to compute capacity-dependent bid prices
    in network revenue management", Operations Research 57(3):637-649. Multipliers minimised by
    projected subgradient steps with the Goffin & Kiwiel (1999) level rule; see the module
    docstring for the maths, the lower bound behind the gap and the warm start.
    """

    name = "lr"
    tags = Tags(upper_bound=True, capacity_dependent=True, control="table", reference=True)
    citation = (
        "H. Topaloglu (2009), Using Lagrangian relaxation to compute capacity-dependent bid "
        "prices in network revenue management, Operations Research 57(3):637-649"
    )
    params = {
        "tol": Param(1e-3, "a number > 0 (relative gap at which to stop)", positive_float),
        "max_iterations": Param(1000, "a whole number >= 1", positive_int),
        "stall_tol": Param(1e-5, "a number >= 0 (relative bound change at which to stop; 0: "
                           "never)", non_negative_float),
        "step_factor": Param(1.0, "a number in (0, 2) (Polyak step factor)", _step_factor_ok),
        "warm_start": Param(False, "True or False", _bool_ok),
        "resolve_iterations": Param(RESOLVE_ITERATIONS, "a whole number >= 1 (budget of a "
                                    "re-solve in a simulation)", positive_int),
        "resolve_tol": Param(RESOLVE_TOL, "a number >= 0 (a re-solve in a simulation stops when "
                             "its bid prices at the state move by at most this fraction of the "
                             "highest fare over 5 iterations; 0: never)", non_negative_float),
    }

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        network, demand = problem.network, problem.demand
        start = self._dual_start(problem)
        warm = False
        if params["warm_start"]:
            stored = self._period_zero_multipliers(network, demand, params)[:, problem.period :, :]
            if _bound_at(network, problem, stored) < _bound_at(network, problem, start):
                start, warm = stored, True
        run = minimise_bound(
            network, problem.probabilities, problem.capacity, start,
            **_run_settings(params), warm=warm,
        )
        return self._output(problem, run, params)

    @staticmethod
    def _dual_start(problem: Problem) -> np.ndarray:
        from rmkit.methods.dlp import leg_duals

        return dual_split(problem.network, leg_duals(problem), problem.probabilities.shape[0])

    def _period_zero_multipliers(self, network, demand, params: dict[str, Any]) -> np.ndarray:
        key = tuple(sorted(_run_settings(params).items()))
        per_network = _START_CACHE.setdefault(network, weakref.WeakKeyDictionary())
        per_demand = per_network.setdefault(demand, {})
        if key not in per_demand:
            full = Problem(network, demand, 0, np.array(network.capacities, dtype=np.int64))
            run = minimise_bound(
                network, full.probabilities, full.capacity, self._dual_start(full),
                **_run_settings(params),
            )
            run.multiplier.setflags(write=False)
            per_demand[key] = run.multiplier
        return per_demand[key]

    def _resolve(self, problems, params, seeds, session) -> list[SolveOutput]:
        """Re-solves of a simulated run: each starts from the run's period-0 split restricted to
        the periods left and stops when its bid prices at the state have settled, or at the
        re-solve budget; its gap is certified by its last policy. Every bound stays valid; the
        session counts how each stopped for the one-line summary.

        The states of a round are independent given the split, and the loop's kernels release
        the GIL, so they run side by side on numba's thread count (one per core unless
        NUMBA_NUM_THREADS says otherwise); each state's numbers do not depend on it."""
        outs: list[SolveOutput | None] = [None] * len(problems)
        rest = []
        for q, problem in enumerate(problems):
            if problem.period == 0 and np.array_equal(problem.capacity,
                                                      problem.network.capacities):
                # the run's first solve: converged, and the split every re-solve starts from
                outs[q] = self._solve(problem, params, None)
                session.cache["split"] = (np.asarray(outs[q].variables["multiplier"])
                                          .transpose(1, 0, 2))
            else:
                rest.append(q)
        if not rest:
            return outs  # type: ignore[return-value]
        split = session.cache.get("split")
        if split is None:
            split = self._period_zero_multipliers(problems[0].network, problems[0].demand, params)
            session.cache["split"] = split

        def one(q: int) -> tuple[LagrangianRun, SolveOutput]:
            problem = problems[q]
            run = minimise_bound(
                problem.network, problem.probabilities, problem.capacity,
                split[:, problem.period :, :],
                **{**_run_settings(params), "max_iterations": params["resolve_iterations"]},
                warm=True, stable_tol=params["resolve_tol"], stable_window=RESOLVE_WINDOW,
                mix=False, keep_multiplier=False,
            )
            return run, self._output(problem, run, params, warn=False, resolved=True)

        for q, (run, out) in zip(rest, side_by_side(one, rest), strict=True):
            why = ("converged" if run.status == "optimal" else "budget"
                   if run.status == "iteration_limit" else "settled")
            session.count(why)
            session.record("gap", float(run.gap_history[-1]))
            session.record("iterations", float(run.gap_history.size))
            outs[q] = out
        return outs  # type: ignore[return-value]

    def resolve_summary(self, session) -> str:
        done = sum(session.counts.values())
        if not done:
            return ""
        gaps = np.array(session.values.get("gap", [np.nan]))
        its = np.array(session.values.get("iterations", [np.nan]))
        return (f"{self.name}: {done} re-solves from the run's period-0 split: "
                f"{session.counts.get('settled', 0)} stopped when their bid prices settled, "
                f"{session.counts.get('budget', 0)} at the budget of "
                f"{self.get_params()['resolve_iterations']} iterations, "
                f"{session.counts.get('converged', 0)} converged; median "
                f"{float(np.median(its)):.0f} iterations, median certified gap "
                f"{float(np.median(gaps)):.2%}")

    def _output(self, problem: Problem, run: LagrangianRun, params: dict[str, Any],
                warn: bool = True, resolved: bool = False) -> SolveOutput:
        """The run as a result; a simulator's re-solve (``resolved``) leaves out the multipliers
        (``(T, L, n)``, 11 MB on the largest public instance, and a round holds hundreds of
        re-solves; the booking control reads the bid-price table only)."""
        leg_value, table = leg_tables(run.values)
        gap = float(run.gap_history[-1])
        message = (
            f"Lagrangian bound {run.bound:.6g}, certified lower bound on its minimum "
            f"{run.lower_bound:.6g} (gap {gap:.3g}) after {run.gap_history.size} iterations"
        )
        if run.status == "optimal_inaccurate":
            message += f"; stopped: the bound improved by < stall_tol in {STALL_WINDOW} iterations"
        if run.status == "iteration_limit" and warn:
            warnings.warn(
                f"lr: stopped at max_iterations={params['max_iterations']} with relative gap "
                f"{gap:.3g} > tol={params['tol']}; the bound is valid but may not be the "
                "tightest; raise max_iterations or tol",
                RuntimeWarning,
                stacklevel=4,
            )
        assert np.isclose(value_at(run.values, problem.capacity).sum(), run.bound, rtol=1e-9,
                          atol=1e-9)
        kept = {} if resolved else {"multiplier": _transposed(run.multiplier)}
        variables = {
            "value": np.float64(run.bound),
            **kept,
            "leg_value": leg_value,
            "bid_price_table": table,
            "bid_price": bid_prices_at(table, problem.capacity),
            "bound_history": run.bound_history,
            "gap_history": run.gap_history,
        }
        return SolveOutput(
            variables=variables,
            status=run.status,
            message=message,
            payload={"iterations": int(run.gap_history.size), "lower_bound": run.lower_bound},
            owned=True,  # every array is this run's own: no copy (the split cache only reads)
        )


def without(params: dict[str, Any], *keys: str) -> dict[str, Any]:
    """``params`` less the settings ``keys`` (a variant's own settings, before calling lr's)."""
    return {k: v for k, v in params.items() if k not in keys}
