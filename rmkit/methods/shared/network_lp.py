"""The network linear program, built once per network and re-solved warm with new bounds.

For remaining capacities ``x`` (one per leg) and a demand bound ``d`` (one per product) the
program is

.. math::

    z(x, d) = \\max_y \\; f^\\top y \\quad \\text{s.t.} \\quad A y \\le x, \\quad 0 \\le y \\le d,

with ``A`` the leg-by-product incidence matrix and ``f`` the fares. With ``d`` the expected
demand to come it is the deterministic LP (DLP); with ``d`` a sampled demand-to-come vector it is
the perfect-hindsight LP of one sample path (Talluri & van Ryzin 1999). Its dual is

.. math::

    \\min_{\\pi, \\sigma \\ge 0} \\; x^\\top \\pi + d^\\top \\sigma
    \\quad \\text{s.t.} \\quad A^\\top \\pi + \\sigma \\ge f,

and the leg duals ``pi`` are the bid prices. :class:`NetworkLP` holds one HiGHS model (Huangfu &
Hall 2018, the dual revised simplex) and changes only column and row bounds between solves, so
each re-solve starts from the previous optimal basis: along a booking path that is usually one or
two simplex iterations.

Degenerate programs have many optimal duals, and bid-price policies are sensitive to which one is
used. ``dual="highs"`` returns HiGHS's dual as is (a vertex of the optimal dual face);
``"min"``/``"max"`` return the optimal dual with the smallest/largest sum of leg duals, found by a
second small LP over the optimal face
``{A'pi + sigma >= f, x'pi + d'sigma <= z(x, d), 0 <= pi_i <= max fare on leg i, 0 <= sigma <= f}``.
The caps do not change the smallest dual and keep the largest finite (a leg with no seats left
would otherwise accept any price); every solution reports which choice was made. With
``"highs"`` the dual of a degenerate program can depend on the basis the solve started from, so
a warm-started model may return a different (equally optimal) dual than a fresh one; the
``"min"``/``"max"`` sums do not depend on that history.

Statuses map HiGHS's model status onto :data:`rmkit.results.STATUSES`; a returned optimum is
re-checked against the constraints and downgraded to ``optimal_inaccurate`` when it violates them.
Anything short of an optimum carries NaN values and a message saying what to check; nothing is
ever silently zero.

>>> from rmkit import Network
>>> net = Network.build([("AB", 2), ("BC", 1)], [("AB", 100.0, ["AB"]), ("AC", 150.0, ["AB", "BC"])])
>>> sol = NetworkLP(net).solve([2, 1], [2.0, 2.0])
>>> round(sol.value, 6), sol.allocation.tolist(), sol.bid_price.tolist()
(250.0, [1.0, 1.0], [100.0, 50.0])
"""

from __future__ import annotations

import os
import sys
import threading
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from rmkit.errors import InputError
from rmkit.model.network import Network

#: Which optimal dual to return when the LP is degenerate.
DUAL_CHOICES = ("highs", "min", "max")

FEASIBILITY_TOL = 1e-7  # absolute slack allowed when re-checking a returned solution


@dataclass(frozen=True)
class LPSolution:
    """One solve: value, primal ``allocation`` (y), leg duals, status and provenance.

    ``dual`` names the dual returned (``"highs"``, ``"min"``, ``"max"``, or ``"none"`` when duals
    were not asked for); ``iterations`` counts simplex iterations of the primal solve.
    """

    value: float
    allocation: np.ndarray
    bid_price: np.ndarray
    status: str
    message: str
    dual: str
    iterations: int

    @property
    def ok(self) -> bool:
        return self.status in ("optimal", "optimal_inaccurate")


@dataclass(frozen=True)
class LPBatch:
    """Many solves, stacked: ``values (K,)``, ``allocations (K, n)``, ``bid_prices (K, m)``."""

    values: np.ndarray
    allocations: np.ndarray
    bid_prices: np.ndarray
    statuses: tuple[str, ...]
    messages: tuple[str, ...]
    dual: str
    iterations: np.ndarray

    @property
    def ok(self) -> bool:
        return all(s in ("optimal", "optimal_inaccurate") for s in self.statuses)

    def first_problem(self) -> tuple[int, str, str] | None:
        """``(index, status, message)`` of the first failed solve (no optimum), else of the
        first inaccurate one, else ``None``."""
        for bad in (lambda s: s not in ("optimal", "optimal_inaccurate"),
                    lambda s: s == "optimal_inaccurate"):
            for k, s in enumerate(self.statuses):
                if bad(s):
                    return k, s, self.messages[k]
        return None


#: File descriptor 1 is process-wide: solves running side by side in threads must not interleave
#: their save / redirect / restore, or one restores the other's /dev/null and stdout is lost.
_STDOUT_SWAP = threading.Lock()


def quiet_highs():
    """A silent ``highspy.Highs``; its constructor prints a banner on stdout that would corrupt
    ``--json`` output, so file descriptor 1 points at /dev/null while it is built (one thread
    at a time)."""
    import highspy

    with _STDOUT_SWAP:
        sys.stdout.flush()
        try:
            saved = os.dup(1)
        except OSError:  # no file descriptor 1 (a detached process): nothing to protect
            h = highspy.Highs()
        else:
            null = os.open(os.devnull, os.O_WRONLY)
            try:
                os.dup2(null, 1)
                h = highspy.Highs()
            finally:
                os.dup2(saved, 1)
                os.close(saved)
                os.close(null)
    h.setOptionValue("output_flag", False)
    # These LPs are small: waking HiGHS's worker threads costs more than they save (a warm
    # re-solve ran about 2.5x faster with one thread on the 8-spoke instances).
    h.setOptionValue("threads", 1)
    return h


def map_status(model_status) -> str:
    """HiGHS model status -> one of :data:`rmkit.results.STATUSES`."""
    import highspy

    ms = highspy.HighsModelStatus
    if model_status == ms.kOptimal:
        return "optimal"
    if model_status == ms.kInfeasible:
        return "infeasible"
    if model_status in (ms.kTimeLimit, ms.kIterationLimit):
        return "iteration_limit"
    return "error"


_ADVICE = {
    "infeasible": (
        "the LP has no feasible point: check that every remaining capacity and every demand "
        "bound is >= 0"
    ),
    "iteration_limit": (
        "HiGHS stopped at its time or iteration limit before an optimum: raise 'time_limit' "
        "(or leave it unset) and re-solve"
    ),
    "error": (
        "HiGHS failed (unbounded, model error or numerical trouble): check that capacities and "
        "demand bounds are finite and >= 0 and fares finite; if they are, report the instance"
    ),
}


def failure_message(what: str, status: str, detail: str) -> str:
    """``"<what> <status> (<HiGHS detail>): <what to check>"``, the one wording of LP failures."""
    return f"{what} {status} ({detail}): {_ADVICE.get(status, _ADVICE['error'])}"


def _csc_incidence(a: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    rows, cols = np.nonzero(a.T)  # ordered by product, then leg
    start = np.zeros(a.shape[1] + 1, dtype=np.int32)
    np.cumsum(np.bincount(rows, minlength=a.shape[1]), out=start[1:])
    return start, cols.astype(np.int32), np.ones(cols.size)


def _leg_fare_caps(network: Network) -> np.ndarray:
    a, f = network.incidence, network.fares
    return np.where(a > 0, f[None, :], 0.0).max(axis=1)


class NetworkLP:
    """The network LP of one network, held in HiGHS and re-solved warm.

    Parameters
    ----------
    network
        Fixes ``A`` and ``f``; capacities and demand bounds are given per solve.
    dual
        Default dual choice, one of :data:`DUAL_CHOICES` (see the module docstring).
    time_limit
        Seconds HiGHS may spend on one solve (``None``: no limit). Hitting it gives status
        ``iteration_limit`` and NaN results.

    Not thread-safe: give each thread its own model. Build once, solve many times.
    """

    def __init__(
        self, network: Network, *, dual: str = "highs", time_limit: float | None = None
    ) -> None:
        import highspy

        _check_dual(dual)
        if time_limit is not None and not (np.isfinite(time_limit) and time_limit > 0):
            raise InputError(f"time_limit: must be a number of seconds > 0, got {time_limit!r}")
        self.network = network
        self.dual = dual
        m, n = network.n_legs, network.n_products
        self._a = network.incidence.astype(np.float64)
        self._f = network.fares
        self._h = quiet_highs()
        self._h.setOptionValue("presolve", "off")  # keep the basis: warm re-solves skip presolve
        if time_limit is not None:
            self._h.setOptionValue("time_limit", float(time_limit))
        lp = highspy.HighsLp()
        lp.num_col_, lp.num_row_ = n, m
        lp.col_cost_ = self._f.copy()
        lp.col_lower_ = np.zeros(n)
        lp.col_upper_ = np.zeros(n)
        lp.row_lower_ = np.full(m, -highspy.kHighsInf)
        lp.row_upper_ = network.capacities.astype(np.float64)
        lp.sense_ = highspy.ObjSense.kMaximize
        start, index, value = _csc_incidence(network.incidence)
        lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
        lp.a_matrix_.start_, lp.a_matrix_.index_, lp.a_matrix_.value_ = start, index, value
        self._h.passModel(lp)
        self._cols = np.arange(n, dtype=np.int32)
        self._rows = np.arange(m, dtype=np.int32)
        self._zeros = np.zeros(n)
        self._row_lower = np.full(m, -highspy.kHighsInf)
        self._face: _DualFace | None = None
        self._time_limit = time_limit

    # ------------------------------------------------------------------ public
    def solve(
        self,
        capacity: Sequence[float] | np.ndarray,
        demand_bound: Sequence[float] | np.ndarray,
        *,
        dual: str | None = None,
        cold: bool = False,
    ) -> LPSolution:
        """Solve for one ``(capacity, demand_bound)`` pair, warm-started from the last basis, or
        with ``cold`` from none: the same answer as a freshly built model (a warm start may
        land on another optimal dual of a degenerate program), without building one."""
        x = self._vector(capacity, self.network.n_legs, "capacity")
        d = self._vector(demand_bound, self.network.n_products, "demand_bound")
        if cold:
            self._h.clearSolver()
        return self._solve_one(x, d, self.dual if dual is None else _check_dual(dual), True)

    def solve_many(
        self,
        capacities: np.ndarray,
        demand_bounds: np.ndarray,
        *,
        dual: str | None = None,
        duals: bool = True,
    ) -> LPBatch:
        """Solve many pairs one after another, each warm-started from the previous optimum.

        ``capacities`` is ``(K, m)`` or one ``(m,)`` vector for all; ``demand_bounds`` is
        ``(K, n)`` or one ``(n,)`` vector. ``duals=False`` skips the dual (faster when only
        values are needed, as for the perfect-hindsight bound); ``bid_prices`` is then NaN.
        Solves in the given order: order them so neighbours are close (a booking path) for the
        fewest simplex iterations.
        """
        m, n = self.network.n_legs, self.network.n_products
        xs = self._stack(capacities, m, "capacities")
        ds = self._stack(demand_bounds, n, "demand_bounds")
        k = max(xs.shape[0], ds.shape[0])
        if xs.shape[0] not in (1, k) or ds.shape[0] not in (1, k):
            raise InputError(
                f"capacities/demand_bounds: need the same number of rows (or one), got "
                f"{xs.shape[0]} and {ds.shape[0]}"
            )
        choice = "none" if not duals else (self.dual if dual is None else _check_dual(dual))
        values = np.empty(k)
        ys = np.empty((k, n))
        pis = np.full((k, m), np.nan)
        iters = np.empty(k, dtype=np.int64)
        statuses: list[str] = []
        messages: list[str] = []
        same_x = xs.shape[0] == 1
        if same_x:
            self._set_capacity(xs[0])
        for s in range(k):
            x = xs[0 if same_x else s]
            d = ds[0 if ds.shape[0] == 1 else s]
            sol = self._solve_one(x, d, choice, duals, capacity_set=same_x, recheck=False)
            values[s], ys[s], iters[s] = sol.value, sol.allocation, sol.iterations
            if duals:
                pis[s] = sol.bid_price
            statuses.append(sol.status)
            messages.append(sol.message)
        # One vectorised re-check of every returned optimum instead of one per solve.
        worst = self._violations(xs, ds, np.nan_to_num(ys))
        scale = FEASIBILITY_TOL * np.maximum(1.0, xs.max(axis=1))
        for s in np.flatnonzero(worst > scale):
            if statuses[s] == "optimal":
                statuses[s], messages[s] = "optimal_inaccurate", _violation_message(worst[s])
        return LPBatch(values, ys, pis, tuple(statuses), tuple(messages), choice, iters)

    # ------------------------------------------------------------------ internals
    def _vector(self, v, size: int, name: str) -> np.ndarray:
        a = np.asarray(v, dtype=np.float64)
        if a.shape != (size,):
            raise InputError(f"{name}: needs {size} entries, got shape {a.shape}")
        if not np.all(np.isfinite(a)):
            raise InputError(f"{name}: entries must be finite, got {a[~np.isfinite(a)][0]!r}")
        return a

    def _stack(self, v, size: int, name: str) -> np.ndarray:
        a = np.asarray(v, dtype=np.float64)
        if a.ndim == 1:
            a = a[None, :]
        if a.ndim != 2 or a.shape[1] != size:
            raise InputError(f"{name}: needs shape (K, {size}) or ({size},), got {np.shape(v)}")
        if not np.all(np.isfinite(a)):
            raise InputError(f"{name}: entries must be finite")
        return a

    def _set_capacity(self, x: np.ndarray) -> None:
        self._h.changeRowsBounds(self._rows.size, self._rows, self._row_lower, x)

    def _solve_one(
        self,
        x: np.ndarray,
        d: np.ndarray,
        choice: str,
        duals: bool,
        capacity_set: bool = False,
        recheck: bool = True,
    ) -> LPSolution:
        h = self._h
        if not capacity_set:
            self._set_capacity(x)
        # A negative bound makes lower > upper; HiGHS refuses that as a model error, so state
        # it plainly as the infeasibility it is.
        if x.min(initial=0.0) < 0 or d.min(initial=0.0) < 0:
            return self._failed("infeasible", "a remaining capacity or demand bound is < 0", choice)
        h.changeColsBounds(self._cols.size, self._cols, self._zeros, d)
        h.run()
        model_status = h.getModelStatus()
        status = map_status(model_status)
        iterations = int(h.getInfoValue("simplex_iteration_count")[1])
        if status != "optimal":
            return self._failed(status, h.modelStatusToString(model_status), choice, iterations)
        sol = h.getSolution()
        y = np.array(sol.col_value)
        value = float(h.getInfoValue("objective_function_value")[1])
        message = ""
        if recheck:
            worst = float(self._violations(x[None, :], d[None, :], y[None, :])[0])
            if worst > FEASIBILITY_TOL * max(1.0, float(np.max(x, initial=0.0))):
                status, message = "optimal_inaccurate", _violation_message(worst)
        if not duals:
            return LPSolution(value, y, np.full(x.size, np.nan), status, message, "none",
                              iterations)
        if choice == "highs":
            pi = np.array(sol.row_dual)
        else:
            face = self._face or _DualFace(self.network, self._time_limit)
            self._face = face
            slack_legs = x - self._a @ y > FEASIBILITY_TOL
            below_bound = y < d - FEASIBILITY_TOL
            pi, face_status = face.extreme(
                x, d, value, choice, slack_legs, below_bound, y > FEASIBILITY_TOL
            )
            if face_status != "optimal":
                return self._failed(face_status, "the optimal-face dual LP did not solve", choice,
                                    iterations)
        # Duals of <= rows in a maximisation are >= 0; clear only rounding noise below zero.
        if np.any(pi < -FEASIBILITY_TOL * max(1.0, float(self._f.max()))):
            status = "optimal_inaccurate"
            message = f"HiGHS returned a negative leg dual ({pi.min():.3g}); treat with care"
        pi = np.maximum(pi, 0.0)
        return LPSolution(value, y, pi, status, message, choice, iterations)

    def _violations(self, xs: np.ndarray, ds: np.ndarray, ys: np.ndarray) -> np.ndarray:
        """Largest constraint violation of each solution row (scipy-style re-check)."""
        over_capacity = (ys @ self._a.T - xs).max(axis=1, initial=0.0)
        over_demand = (ys - ds).max(axis=1, initial=0.0)
        negative = (-ys).max(axis=1, initial=0.0)
        return np.maximum(np.maximum(over_capacity, over_demand), negative)

    def _failed(self, status: str, detail: str, choice: str, iterations: int = 0) -> LPSolution:
        m, n = self.network.n_legs, self.network.n_products
        return LPSolution(
            float("nan"),
            np.full(n, np.nan),
            np.full(m, np.nan),
            status,
            failure_message("network LP", status, detail),
            choice,
            iterations,
        )


class _DualFace:
    """The dual LP restricted to its optimal face; finds the smallest or largest leg duals."""

    def __init__(self, network: Network, time_limit: float | None) -> None:
        import highspy

        m, n = network.n_legs, network.n_products
        self.m, self.n = m, n
        h = quiet_highs()
        h.setOptionValue("presolve", "off")
        if time_limit is not None:
            h.setOptionValue("time_limit", float(time_limit))
        inf = highspy.kHighsInf
        f = network.fares
        # columns: pi (m) then sigma (n); rows: n cover rows A'pi + sigma >= f, then one
        # optimality row x'pi + d'sigma <= z*.
        a = network.incidence
        lp = highspy.HighsLp()
        lp.num_col_, lp.num_row_ = m + n, n + 1
        lp.col_cost_ = np.r_[np.ones(m), np.zeros(n)]
        lp.col_lower_ = np.zeros(m + n)
        lp.col_upper_ = np.r_[_leg_fare_caps(network), f]
        lp.row_lower_ = np.r_[f, -inf]
        lp.row_upper_ = np.r_[np.full(n, inf), 0.0]
        rows = np.vstack([np.hstack([a.T, np.eye(n)]), np.ones((1, m + n))])
        start, index, value = _csc_incidence(rows)
        lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
        lp.a_matrix_.start_, lp.a_matrix_.index_, lp.a_matrix_.value_ = start, index, value
        h.passModel(lp)
        self.h = h
        self._upper = np.array(lp.col_upper_, dtype=np.float64)
        self._lower = np.zeros(m + n)
        self._cols = np.arange(m + n, dtype=np.int32)
        self._cover_rows = np.arange(n, dtype=np.int32)
        self._f = np.asarray(f, dtype=np.float64)
        self._scale = max(1.0, float(f.max()))

    def extreme(
        self,
        x: np.ndarray,
        d: np.ndarray,
        z: float,
        choice: str,
        slack_legs: np.ndarray,
        below_bound: np.ndarray,
        positive: np.ndarray,
    ) -> tuple[np.ndarray, str]:
        import highspy

        h, m, n = self.h, self.m, self.n
        # Complementary slackness with the primal optimum describes the optimal face exactly:
        # slack constraints have zero duals and products sold (y_j > 0) have zero reduced cost.
        # The optimality row, with a rounding tolerance, guards against misclassified noise.
        upper = np.where(np.r_[slack_legs, below_bound], 0.0, self._upper)
        h.changeColsBounds(m + n, self._cols, self._lower, upper)
        cover_upper = np.where(positive, self._f, highspy.kHighsInf)
        h.changeRowsBounds(n, self._cover_rows, self._f, cover_upper)
        row = n
        for k, c in enumerate(np.r_[x, d]):
            h.changeCoeff(row, k, float(c))
        h.changeRowBounds(row, -highspy.kHighsInf, z + 1e-9 * abs(z) + 1e-7 * self._scale)
        sense = highspy.ObjSense.kMinimize if choice == "min" else highspy.ObjSense.kMaximize
        h.changeObjectiveSense(sense)
        h.run()
        status = map_status(h.getModelStatus())
        if status != "optimal":
            return np.full(m, np.nan), status
        return np.array(h.getSolution().col_value[:m]), status


def _violation_message(worst: float) -> str:
    return f"HiGHS's optimum violates a constraint by {worst:.3g}; treat with care"


def _check_dual(dual: str) -> str:
    if dual not in DUAL_CHOICES:
        raise InputError(
            f"dual: must be one of {', '.join(repr(c) for c in DUAL_CHOICES)}, got {dual!r}"
        )
    return dual


def raise_or_warn(method: str, status: str, message: str) -> None:
    """What a solver does with an LP that did not reach an optimum.

    A time or iteration limit is non-convergence: a ``RuntimeWarning``, and the caller returns the
    status with NaN results. Infeasible or failed programs cannot come from a validated booking
    state, so they are a back-end failure: :class:`rmkit.errors.SolverError` with the advice.
    """
    import warnings

    from rmkit.errors import SolverError

    if status in ("optimal", "optimal_inaccurate"):
        if message:
            warnings.warn(f"{method}: {message}", RuntimeWarning, stacklevel=3)
        return
    if status == "iteration_limit":
        warnings.warn(f"{method}: {message}", RuntimeWarning, stacklevel=3)
        return
    raise SolverError(f"{method}: {message}")


def time_limit_ok(v: object) -> bool:
    """Rule of the ``time_limit`` solver setting: ``None`` or seconds > 0."""
    return v is None or (
        isinstance(v, (int, float, np.integer, np.floating))
        and not isinstance(v, bool)
        and bool(np.isfinite(v))
        and v > 0
    )
