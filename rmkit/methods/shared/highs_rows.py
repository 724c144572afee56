"""A linear or mixed-integer program given row by row, solved by HiGHS (used by the choice
programs, whose rows are easiest to write one at a time)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rmkit.methods.shared.network_lp import map_status, quiet_highs

#: A row: (column indices, coefficients, lower bound, upper bound).
Row = tuple[list[int], list[float], float, float]


@dataclass(frozen=True)
class RowsSolution:
    status: str
    detail: str
    value: float
    columns: np.ndarray
    row_duals: np.ndarray


def solve_rows(cost: list[float], lower: list[float], upper: list[float], rows: list[Row], *,
               integer: list[bool] | None = None, gap: float | None = None) -> RowsSolution:
    """Maximise ``cost . x`` subject to ``rows`` and column bounds (``integer`` marks the
    integer columns; ``gap`` sets HiGHS's relative and absolute MIP gaps)."""
    import highspy

    lp = highspy.HighsLp()
    lp.num_col_, lp.num_row_ = len(cost), len(rows)
    lp.col_cost_ = np.array(cost, dtype=np.float64)
    lp.col_lower_ = np.array(lower, dtype=np.float64)
    lp.col_upper_ = np.array(upper, dtype=np.float64)
    lp.row_lower_ = np.array([r[2] for r in rows], dtype=np.float64)
    lp.row_upper_ = np.array([r[3] for r in rows], dtype=np.float64)
    lp.sense_ = highspy.ObjSense.kMaximize
    lp.a_matrix_.format_ = highspy.MatrixFormat.kRowwise
    lp.a_matrix_.start_ = np.concatenate([[0], np.cumsum([len(r[0]) for r in rows])]).astype(
        np.int32)
    lp.a_matrix_.index_ = np.array([i for r in rows for i in r[0]], dtype=np.int32)
    lp.a_matrix_.value_ = np.array([v for r in rows for v in r[1]], dtype=np.float64)
    if integer is not None:
        lp.integrality_ = [highspy.HighsVarType.kInteger if b else highspy.HighsVarType.kContinuous
                           for b in integer]
    h = quiet_highs()
    if gap is not None:
        h.setOptionValue("mip_rel_gap", gap)
        h.setOptionValue("mip_abs_gap", gap)
    h.passModel(lp)
    h.run()
    status = map_status(h.getModelStatus())
    sol = h.getSolution()
    value = float(h.getInfoValue("objective_function_value")[1])
    return RowsSolution(status, h.modelStatusToString(h.getModelStatus()), value,
                        np.array(sol.col_value), np.array(sol.row_dual))
