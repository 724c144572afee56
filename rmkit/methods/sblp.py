"""SBLP: the sales-based linear program for MNL choice demand, and its leg duals as bid prices.

Gallego, Ratliff & Shebalov (2015), "A general attraction model and sales-based linear program
for network revenue management under customer choice", Operations Research 63(1):212-232. In
place of CDLP's exponentially many offer sets, the variables are sales: ``x_lj`` of product j to
segment l and ``x_l0`` of segment l's no-purchases, per epoch of equal arrival probabilities
(:mod:`rmkit.methods.shared.cdlp`) with ``Lambda_l`` the segment's expected arrivals there::

    max sum f_j x_lj
    s.t. sum_{l, j} A_ij x_lj <= x_i                          (capacity, duals = bid prices)
         sum_{j in C_l} x_lj + x_l0 = Lambda_l                (every customer buys or not)
         x_lj / v_lj <= x_l0 / v_l0   (v_l0 > 0)              (MNL: sales scale with weights)
         x >= 0.

Any CDLP solution gives such sales (sum the set probabilities over the time each set is
offered), so SBLP >= CDLP >= the optimal expected revenue: an upper bound. When no product is
considered by two segments, the sales of each segment can be realised by its own revenue-ordered
sets and SBLP equals CDLP (GRS 2015, Theorem 1); when segments overlap, the segments may see
different sets in the program, so SBLP is a weaker bound. With ``v_l0 = 0`` any split of a
segment's purchases is reachable (offer single products), so only the balance row applies.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.methods.base import Problem, SolveOutput, Solver, Tags, register
from rmkit.methods.shared.highs_rows import solve_rows
from rmkit.methods.shared.network_lp import raise_or_warn


@register
class SalesBasedLP(Solver):
    """Sales-based LP (Gallego, Ratliff & Shebalov 2015) for MNL segments; leg duals as bid
    prices. Equals CDLP when consideration sets do not overlap, bounds it from above otherwise."""

    name = "sblp"
    tags = Tags(upper_bound=True, control="bid_price", reference=True)
    citation = (
        "G. Gallego, R. Ratliff and S. Shebalov (2015), A general attraction model and "
        "sales-based linear program for network revenue management under customer choice, "
        "Operations Research 63(1):212-232"
    )
    demand_kinds = ("choice",)

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        import highspy

        net, dem = problem.network, problem.demand
        lam = dem.arrival[problem.period:]  # type: ignore[attr-defined]
        rows, epoch = np.unique(lam, axis=0, return_inverse=True)
        mass = rows * np.bincount(epoch.reshape(-1), minlength=rows.shape[0])[:, None]
        a, f = net.incidence, net.fares
        m = net.n_legs
        cost: list[float] = []
        cap_rows: list[list[tuple[int, float]]] = [[] for _ in range(m)]
        other: list[tuple[list[int], list[float], float, float]] = []
        for e in range(rows.shape[0]):
            for l, (c, w) in enumerate(zip(dem.consider, dem.weights, strict=True)):  # type: ignore[attr-defined]
                v0 = float(dem.no_purchase[l])  # type: ignore[attr-defined]
                x0 = len(cost)
                cost.append(0.0)
                cols = []
                for j, v in zip(c, w, strict=True):
                    k = len(cost)
                    cost.append(float(f[j]))
                    cols.append(k)
                    for i in np.flatnonzero(a[:, j]):
                        cap_rows[i].append((k, 1.0))
                    if v0 > 0:
                        other.append(([k, x0], [v0, -float(v)], -highspy.kHighsInf, 0.0))
                other.append(([x0, *cols], [1.0] * (len(cols) + 1), mass[e, l], mass[e, l]))
        all_rows = [([k for k, _ in r], [v for _, v in r], -highspy.kHighsInf,
                     float(problem.capacity[i])) for i, r in enumerate(cap_rows)] + other
        n_cols = len(cost)
        sol = solve_rows(cost, [0.0] * n_cols, [highspy.kHighsInf] * n_cols, all_rows)
        status = sol.status
        message = "" if status == "optimal" else f"SBLP {status} ({sol.detail})"
        raise_or_warn(self.name, status, message)
        ok = status == "optimal"
        value = sol.value if ok else float("nan")
        duals = np.maximum(sol.row_duals[:m], 0.0) if ok else np.full(m, np.nan)
        return SolveOutput(variables={"value": np.float64(value), "bid_price": duals},
                           status=status, message=message)
