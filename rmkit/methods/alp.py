"""ALP: the affine approximate linear program of the network DP (Adelman 2007), in compact form.

Reference: D. Adelman (2007), "Dynamic bid prices in revenue management", *Operations Research*
55(4):647-661; the compact reformulation follows H. Tong and H. Topaloglu (2014), "On the
approximate linear programming approach for network revenue management problems", *INFORMS
Journal on Computing* 26(1):121-134.

The program
-----------
Periods ``t = t0 .. T-1`` (0-based), remaining capacity ``c`` at ``t0``, states ``x`` in the box
``X = {0..c}`` (integers), decisions ``u in {0,1}^n`` with ``u_j = 1`` only if ``x >= A_j``. The
network DP is ``V_t(x) = max_u sum_j p_tj u_j (f_j + V_{t+1}(x - A_j)) + (1 - sum_j p_tj u_j)
V_{t+1}(x)``, ``V_T = 0``. Any function with ``W_t(x) >= `` the right-hand side with ``W_{t+1}``
for every ``(t, x, u)`` and ``W_T = 0`` bounds V from above (induction on t). With
``W_t(x) = theta_t + sum_i v_ti x_i`` (``theta_T = 0``, ``v_T = 0``) and
``r_tj = p_tj (f_j - sum_{i in j} v_{t+1,i})`` the constraints read

.. math::

    \\theta_t - \\theta_{t+1} \\ge \\max_{(x,u)} \\sum_i (v_{t+1,i} - v_{ti}) x_i
    + \\sum_j r_{tj} u_j  \\qquad (t = t_0 .. T-1),

and the ALP minimises ``theta_t0 + v_t0 . c``.

Exact separation, and the compact LP
------------------------------------
The maximum is over the integer points of ``P = {0 <= x <= c, 0 <= u <= 1, u_j - x_i <= 0 for
every leg i of product j}``. Every row ``u_j - x_i <= 0`` has one +1 and one -1, so the matrix is
the transpose of a directed graph's incidence matrix, totally unimodular, and stays so with the
identity rows of the bounds appended; with integer right-hand sides ``c, 1, 0`` every vertex of P
is integral (Hoffman and Kruskal 1956). So the integer maximum equals the LP maximum over P. (It
is a maximum-weight closure problem: open legs cost ``v_ti - v_{t+1,i}`` per seat, products
earn ``r_tj`` when all their legs are open.) By LP duality the maximum equals

.. math::

    \\min \\; c^\\top a_t + 1^\\top b_t \\;\\; \\text{s.t.} \\;\\;
    a_{ti} - \\sum_{j \\ni i} w_{tij} \\ge v_{t+1,i} - v_{ti}, \\quad
    b_{tj} + \\sum_{i \\in j} w_{tij} \\ge r_{tj}, \\quad a, b, w \\ge 0,

so ``theta_t - theta_{t+1} >= max`` holds iff some ``(a_t, b_t, w_t) >= 0`` satisfies these rows
with ``theta_t - theta_{t+1} >= c'a_t + 1'b_t``. Minimising ``theta_t0`` makes every such
inequality tight, which eliminates theta: the ALP is the single LP

.. math::

    \\min \\; c^\\top v_{t_0} + \\sum_t (c^\\top a_t + 1^\\top b_t)

over ``v_t, a_t, b_t, w_t >= 0`` subject to the two row families above, with
``(T - t0)(2L + n + nnz(A))`` columns and ``(T - t0)(L + n)`` rows, the same kind of reduction as
Tong & Topaloglu (2014) [their exact formulation cited from memory]. It is solved once by HiGHS
(interior point with crossover by default); ``theta_t = sum_{s >= t} (c'a_s + 1'b_s)`` is
recovered afterwards.

Why ``v >= 0`` loses nothing: in the dual of the ALP (first moments of state-action frequencies
``mu_t``) a free ``v`` gives equalities ``E_{mu_t}[x_i] = E_{mu_{t-1}}[x_i - sum_j p_j u_j A_ij]``
and ``v >= 0`` relaxes them to ``<=``. A solution of the relaxed dual whose mean capacity fell
short can raise its ``x_i`` values towards ``c_i`` (raising ``x`` keeps every ``u`` feasible and
changes no revenue) until the mean is met exactly, so both duals have the same optimum. The
bound is therefore Adelman's, and the bid prices are non-negative. (Checked: the free-``v`` LP
gives the same values on rm_200_4_1.0_4.0 and rm_200_4_1.6_8.0.)

Bid prices: the value of a seat of leg i for a request in period t is ``v_{t+1,i}`` (the
approximation is linear in x); ``bid_price_table[t, x, i] = v_{t+1,i}`` for ``1 <= x <= c_i``,
``+inf`` at ``x = 0``, NaN above the leg's capacity. They depend on the period, not on the
seats left. The policy is Adelman's: these dynamic bid prices from one solve steer the whole
horizon (control ``period_table``, not re-solved; see :mod:`rmkit.controls.period_table`).

Published check: Topaloglu (2009), Table 2, column "LV" reports this bound for the six 4-spoke
200-period instances; the compact LP reproduces every one to rounding (tests/test_bounds.py).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.methods.base import Problem, SolveOutput, Solver, Tags, register
from rmkit.methods.shared.sparse_lp import LP_PARAMS, report_failure, solve_sparse_lp


def affine_alp_program(incidence: np.ndarray, fares: np.ndarray, prob: np.ndarray,
                       capacity: np.ndarray):
    """``(cost, matrix, row_lower, layout)`` of the compact affine ALP (module docstring).

    Columns, period-major: ``v (T, L)``, ``a (T, L)``, ``b (T, n)``, ``w (T, nnz)``; all ``>= 0``.
    Rows: ``(T, L)`` leg rows then ``(T, n)`` product rows, all ``>= row_lower``.
    """
    import scipy.sparse as sp

    n_periods, n = prob.shape
    n_legs = incidence.shape[0]
    legs_of, prods_of = np.nonzero(incidence)  # one entry per (leg, product) incidence pair
    nnz = legs_of.size
    cap = capacity.astype(np.float64)
    t = np.arange(n_periods)[:, None]
    leg_block = t * n_legs + np.arange(n_legs)[None, :]  # (T, L) index of v, a and leg rows
    v_col, a_col = leg_block, n_periods * n_legs + leg_block
    b_col = 2 * n_periods * n_legs + t * n + np.arange(n)[None, :]
    w_col = 2 * n_periods * n_legs + n_periods * n + t * nnz + np.arange(nnz)[None, :]
    n_cols = n_periods * (2 * n_legs + n + nnz)
    prod_row = n_periods * n_legs + t * n  # + product index
    ones = np.ones
    rows = [leg_block, leg_block, leg_block[:-1], t * n_legs + legs_of[None, :],
            prod_row + np.arange(n)[None, :], prod_row + prods_of[None, :],
            prod_row[:-1] + prods_of[None, :]]
    cols = [a_col, v_col, v_col[1:], w_col,
            b_col, w_col,
            v_col[1:][:, legs_of]]
    vals = [ones(leg_block.shape), ones(leg_block.shape), -ones(leg_block[:-1].shape),
            -ones(w_col.shape),
            ones(b_col.shape), ones(w_col.shape),
            prob[:-1][:, prods_of]]  # p_tj v_{t+1,i}: v_T = 0 has no column
    matrix = sp.csc_matrix(
        (np.concatenate([v.ravel() for v in vals]),
         (np.concatenate([r.ravel() for r in rows]), np.concatenate([c.ravel() for c in cols]))),
        shape=(n_periods * (n_legs + n), n_cols),
    )
    cost = np.zeros(n_cols)
    cost[v_col[0]] = cap
    cost[a_col.ravel()] = np.tile(cap, n_periods)
    cost[b_col.ravel()] = 1.0
    row_lower = np.r_[np.zeros(n_periods * n_legs), (prob * fares[None, :]).ravel()]
    layout = {"v": v_col, "a": a_col, "b": b_col}
    return cost, matrix, row_lower, layout


@register
class AffineALP(Solver):
    """Affine approximate LP (Adelman 2007) in the compact form of Tong & Topaloglu (2014)."""

    name = "alp"
    tags = Tags(upper_bound=True, capacity_dependent=False, control="period_table", reference=True)
    citation = (
        "D. Adelman (2007), Dynamic bid prices in revenue management, Operations Research "
        "55(4):647-661; H. Tong and H. Topaloglu (2014), On the approximate linear programming "
        "approach for network revenue management problems, INFORMS Journal on Computing "
        "26(1):121-134"
    )
    params = LP_PARAMS

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        net, cap = problem.network, problem.capacity
        prob = np.ascontiguousarray(problem.probabilities)
        cost, matrix, row_lower, layout = affine_alp_program(net.incidence, net.fares, prob, cap)
        sol = solve_sparse_lp(cost, matrix, row_lower, np.full(row_lower.size, np.inf),
                              solver=params["solver"], time_limit=params["time_limit"])
        message = report_failure(self.name, "affine ALP", sol)
        if sol.status != "optimal":
            return SolveOutput({"value": np.float64(np.nan)}, status=sol.status, message=message)
        n_periods, n_legs = prob.shape[0], net.n_legs
        v = np.zeros((n_periods + 1, n_legs))  # v_T = 0
        v[:-1] = np.maximum(sol.primal[layout["v"]], 0.0)  # clear crossover rounding below 0
        per_period = sol.primal[layout["a"]] @ cap + sol.primal[layout["b"]].sum(axis=1)
        theta = np.r_[np.cumsum(per_period[::-1])[::-1], 0.0]
        table = np.full((n_periods, net.max_capacity + 1, n_legs), np.nan)
        for i, c in enumerate(net.capacities):
            table[:, 1 : c + 1, i] = v[1:, i, None]
        table[:, 0, :] = np.inf
        value = sol.value
        return SolveOutput(
            variables={
                "value": np.float64(value),
                "bid_price_table": table,
                "bid_price": table[0, cap, np.arange(n_legs)],
            },
            status=sol.status,
            message=f"affine ALP solved by HiGHS ({params['solver']})",
            payload={"theta": theta, "slope": v, "lp_seconds": sol.seconds},
        )
