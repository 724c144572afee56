"""One sparse linear program handed to HiGHS in one piece, for the compact bound LPs.

``alp`` and ``lr-lp`` build their programs as scipy CSC matrices with row and column bounds and
solve them once (no warm re-solves, unlike :class:`rmkit.methods.shared.network_lp.NetworkLP`).
The HiGHS status maps onto :data:`rmkit.results.STATUSES` with the shared
:func:`rmkit.methods.shared.network_lp.map_status`.

``solver="clarabel"`` hands the same program to Clarabel's interior-point method (P. J. Goulart
and Y. Chen (2024), "Clarabel: an interior-point solver for conic programs with quadratic
objectives", arXiv:2405.12762; installed with cvxpy), whose sparse LDL factorisation finished the
Lagrangian LP of the 200-period public instances where HiGHS's simplex and interior point did
not within minutes (benchmarks/bench_bounds.py). Its answer is an interior point, not a vertex.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rmkit.methods.base import Param, one_of
from rmkit.methods.shared.network_lp import failure_message, raise_or_warn, time_limit_ok

#: HiGHS algorithms a compact bound LP may use.
LP_SOLVERS = ("ipm", "simplex", "clarabel")

#: The settings of every compact bound LP (alp, lr-lp).
LP_PARAMS = {
    "solver": Param("ipm", "one of " + ", ".join(repr(s) for s in LP_SOLVERS), one_of(*LP_SOLVERS)),
    "time_limit": Param(None, "None or a number of seconds > 0", time_limit_ok),
}


@dataclass(frozen=True)
class SparseLPSolution:
    value: float
    primal: np.ndarray
    status: str
    detail: str
    seconds: float


def solve_sparse_lp(
    cost: np.ndarray,
    matrix,
    row_lower: np.ndarray,
    row_upper: np.ndarray,
    col_lower: np.ndarray | None = None,
    col_upper: np.ndarray | None = None,
    *,
    solver: str = "ipm",
    time_limit: float | None = None,
    presolve: bool = True,
) -> SparseLPSolution:
    """Minimise ``cost'y`` s.t. ``row_lower <= matrix y <= row_upper``, ``col_lower <= y <= col_upper``.

    Infinite bounds may be given as ``numpy.inf``; columns default to ``[0, inf)``. ``solver`` is
    ``"ipm"`` (interior point then crossover, so the answer is a vertex) or ``"simplex"``.
    """
    import time

    import highspy

    from rmkit.methods.shared.network_lp import map_status, quiet_highs

    inf = highspy.kHighsInf
    csc = matrix.tocsc()
    n_cols = csc.shape[1]
    col_lower = np.zeros(n_cols) if col_lower is None else col_lower
    col_upper = np.full(n_cols, np.inf) if col_upper is None else col_upper
    if n_cols == 0:  # e.g. no seat left anywhere: nothing to optimise (HiGHS calls it an error)
        return SparseLPSolution(0.0, np.zeros(0), "optimal", "empty program", 0.0)
    if solver == "clarabel":
        return _solve_clarabel(cost, csc, row_lower, row_upper, col_lower, col_upper, time_limit)
    h = quiet_highs()
    h.setOptionValue("solver", solver)
    if not presolve:
        h.setOptionValue("presolve", "off")
    if time_limit is not None:
        h.setOptionValue("time_limit", float(time_limit))
    lp = highspy.HighsLp()
    lp.num_col_, lp.num_row_ = csc.shape[1], csc.shape[0]
    lp.col_cost_ = np.asarray(cost, dtype=np.float64)
    lp.col_lower_ = np.nan_to_num(np.asarray(col_lower, dtype=np.float64), neginf=-inf, posinf=inf)
    lp.col_upper_ = np.nan_to_num(np.asarray(col_upper, dtype=np.float64), neginf=-inf, posinf=inf)
    lp.row_lower_ = np.nan_to_num(np.asarray(row_lower, dtype=np.float64), neginf=-inf, posinf=inf)
    lp.row_upper_ = np.nan_to_num(np.asarray(row_upper, dtype=np.float64), neginf=-inf, posinf=inf)
    lp.sense_ = highspy.ObjSense.kMinimize
    lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
    lp.a_matrix_.start_ = csc.indptr.astype(np.int32)
    lp.a_matrix_.index_ = csc.indices.astype(np.int32)
    lp.a_matrix_.value_ = csc.data.astype(np.float64)
    h.passModel(lp)
    start = time.perf_counter()
    h.run()
    seconds = time.perf_counter() - start
    model_status = h.getModelStatus()
    status = map_status(model_status)
    detail = h.modelStatusToString(model_status)
    if status != "optimal":
        return SparseLPSolution(float("nan"), np.full(csc.shape[1], np.nan), status, detail,
                                seconds)
    value = float(h.getInfoValue("objective_function_value")[1])
    return SparseLPSolution(value, np.array(h.getSolution().col_value), status, detail, seconds)


def _solve_clarabel(cost, csc, row_lower, row_upper, col_lower, col_upper,
                    time_limit: float | None) -> SparseLPSolution:
    """The program in Clarabel's form ``A y + s = b``, ``s`` in a zero or non-negative cone."""
    import time

    import clarabel
    import scipy.sparse as sp

    row_lower, row_upper = np.asarray(row_lower, float), np.asarray(row_upper, float)
    col_lower, col_upper = np.asarray(col_lower, float), np.asarray(col_upper, float)
    equal = row_lower == row_upper
    below, above = ~equal & np.isfinite(row_upper), ~equal & np.isfinite(row_lower)
    low_col, up_col = np.isfinite(col_lower), np.isfinite(col_upper)
    eye = sp.identity(csc.shape[1], format="csr")
    rows = csc.tocsr()
    a = sp.vstack([rows[equal], rows[below], -rows[above], eye[up_col], -eye[low_col]]).tocsc()
    b = np.r_[row_lower[equal], row_upper[below], -row_lower[above], col_upper[up_col],
              -col_lower[low_col]]
    cones = [clarabel.ZeroConeT(int(equal.sum())), clarabel.NonnegativeConeT(b.size - int(equal.sum()))]
    settings = clarabel.DefaultSettings()
    settings.verbose = False
    settings.max_threads = 1  # the solve is sequential; stay off the other core
    if time_limit is not None:
        settings.time_limit = float(time_limit)
    start = time.perf_counter()
    out = clarabel.DefaultSolver(sp.csc_matrix((csc.shape[1], csc.shape[1])),
                                 np.asarray(cost, float), a, b, cones, settings).solve()
    seconds = time.perf_counter() - start
    detail = str(out.status)
    status = {"Solved": "optimal", "AlmostSolved": "optimal_inaccurate",
              "MaxTime": "iteration_limit", "MaxIterations": "iteration_limit",
              "PrimalInfeasible": "infeasible", "DualInfeasible": "infeasible"}.get(detail, "error")
    if status not in ("optimal", "optimal_inaccurate"):
        return SparseLPSolution(float("nan"), np.full(csc.shape[1], np.nan), status, detail,
                                seconds)
    return SparseLPSolution(float(out.obj_val), np.array(out.x), status, detail, seconds)


def report_failure(method: str, what: str, sol: SparseLPSolution) -> str:
    """Warn or raise (shared LP rules) when ``sol`` is no optimum; its message, else ``""``."""
    if sol.status == "optimal":
        return ""
    if sol.status == "optimal_inaccurate":
        return f"{what}: the solver stopped at reduced accuracy ({sol.detail})"
    message = failure_message(what, sol.status, sol.detail)
    raise_or_warn(method, sol.status, message)
    return message
