"""LR-LP: the Lagrangian-relaxation bound as one linear program (the piecewise-linear ALP).

References: S. Kunnumkal and K. Talluri (2016), "On a piecewise-linear approximation for network
revenue management", *Mathematics of Operations Research* 41(1):72-91 (the piecewise-linear ALP,
``V_t(x) ~ sum_i v_ti(x_i)``, has a compact LP form whose value is the Lagrangian bound);
H. Topaloglu (2009), "Using Lagrangian relaxation to compute capacity-dependent bid prices in
network revenue management", *Operations Research* 57(3):637-649 (the relaxation itself).

The program
-----------
For a fare split ``lambda`` (``sum_{i in j} lambda_itj = f_j``, ``lambda >= 0``) leg i's DP is
``v_i(t, x) = v_i(t+1, x) + sum_{j ni i} p_tj max(0, lambda_itj - (v_i(t+1, x) - v_i(t+1, x-1)))``
and ``sum_i v_i(t0, c_i)`` bounds the network optimum (:mod:`rmkit.methods.lr`). Writing each
``max(0, .)`` as a variable ``w_itjx >= 0`` with ``w_itjx >= lambda_itj - v_i(t+1,x) +
v_i(t+1,x-1)`` gives

.. math::

    \\min \\sum_i v_i(t_0, c_i) \\;\\; \\text{s.t.} \\;\\;
    v_i(t,x) \\ge v_i(t+1,x) + \\sum_{j \\ni i} p_{tj} w_{itjx}, \\quad
    w \\ge \\lambda - \\Delta v, \\quad w, \\lambda, v \\ge 0, \\quad
    \\textstyle\\sum_{i \\in j} \\lambda_{itj} = f_j .

For fixed lambda the least feasible ``v`` is the leg DP's value (the right-hand side is
non-decreasing in ``v_i(t+1, .)``, so by induction on t every feasible v dominates the DP and
the DP is feasible), so minimising jointly over (v, w, lambda) gives exactly ``min_lambda L``,
the Lagrangian bound; Kunnumkal & Talluri (2016) show this LP is also the piecewise-linear ALP.
``v(t, 0) = 0`` and ``v(T, .) = 0`` are fixed; ``v >= 0`` and ``lambda >= 0`` lose nothing (DP
values are non-negative; for ``lambda >= 0`` see :mod:`rmkit.methods.lr`). The hinge variables
are scaled by ``p`` (``w' = p w``) so that the coefficients of the value rows are all 1. Size:
``(T - t0) sum_i c_i n_i`` hinge columns and rows, where ``n_i`` counts the products on leg i
requested in a period; a leg with no seat left and the products through it drop out (they can
never sell: their whole fare goes to the closed leg).

The reported value is not the LP objective but the leg DPs run at the LP's multipliers (clipped
at 0 and rescaled to their fare), a bound valid whatever the LP accuracy; the LP objective and
the difference are in the payload and message. Bid prices, leg values and multipliers follow the
conventions of ``lr``.

Cost: the program has one hinge per (period, leg, product, seat). HiGHS solves it in well under a
second on small networks but not within five minutes (simplex or interior point) on the
200-period public instances, about 280,000 columns. ``solver="clarabel"`` (an interior-point
method with a sparse direct factorisation) gets there in minutes on the shared 2-core machine but
may stop at reduced accuracy (status ``optimal_inaccurate``); the reported value is still a valid
bound, since it comes from the leg DPs at the returned multipliers. The 600-period 8-spoke
instances (about 1.8 million hinges) are out of reach (benchmarks/bench_bounds.py). Programs with
more than ``max_hinges`` hinges (default 50,000, which every public instance exceeds) are refused
up front, so ``compare`` skips the method with that reason; ``time_limit`` bounds the wait. The
subgradient ``lr`` remains the practical solver there, and this LP is the exact reference it is
checked against on small networks.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.errors import ProblemTooLargeError
from rmkit.methods.base import Param, Problem, SolveOutput, Solver, Tags, positive_int, register
from rmkit.methods.shared.leg_dp import bid_prices_at, leg_tables, network_leg_values, value_at
from rmkit.methods.shared.sparse_lp import LP_PARAMS, report_failure, solve_sparse_lp


def lagrangian_program(incidence: np.ndarray, fares: np.ndarray, prob: np.ndarray,
                       capacity: np.ndarray):
    """``(cost, matrix, row_lower, row_upper, triples, lambda_col)`` of the compact LR LP.

    ``triples`` is ``(t, leg, product)`` of every hinge family in the program; ``lambda_col``
    gives the column of each triple's multiplier (-1 for single-leg products, whose share is
    their fare). Columns: ``v`` (leg-major, then period, then seat 1..c), multipliers, hinges.
    """
    import scipy.sparse as sp

    n_periods, n = prob.shape
    n_legs = incidence.shape[0]
    cap = np.asarray(capacity, dtype=np.int64)
    n_legs_of = incidence.sum(axis=0)
    sellable = np.all((incidence == 0) | (cap[:, None] > 0), axis=0)
    v_start = np.r_[0, np.cumsum(n_periods * cap)]
    n_v = int(v_start[-1])
    legs_of, prods_of = np.nonzero(incidence)
    t_of, pair = np.nonzero((prob[:, prods_of] > 0) & sellable[prods_of][None, :])
    leg, prod = legs_of[pair], prods_of[pair]
    multi = n_legs_of[prod] > 1
    lambda_col = np.full(t_of.size, -1, dtype=np.int64)
    lambda_col[multi] = n_v + np.arange(int(multi.sum()))
    n_lambda = int(multi.sum())
    # one hinge per (triple, seat x = 1..c_leg)
    seats = cap[leg]
    triple = np.repeat(np.arange(t_of.size), seats)
    n_w = triple.size
    x = np.arange(n_w) - np.repeat(np.cumsum(seats) - seats, seats) + 1
    te, ie, je = t_of[triple], leg[triple], prod[triple]
    pe = prob[te, je]
    w_col = n_v + n_lambda + np.arange(n_w)
    value_row = v_start[ie] + te * cap[ie] + x - 1  # the row of v_i(t, x), same as its column
    v_leg = np.repeat(np.arange(n_legs), n_periods * cap)
    v_all = np.arange(n_v)
    has_next = (v_all - v_start[v_leg]) // np.maximum(cap[v_leg], 1) < n_periods - 1
    hinge_row = n_v + np.arange(n_w)
    later = te < n_periods - 1
    v_next = value_row + cap[ie]  # v_i(t+1, x)
    below = later & (x > 1)
    rows = [v_all, v_all[has_next], value_row,
            hinge_row, hinge_row[later], hinge_row[below], hinge_row[multi[triple]]]
    cols = [v_all, v_all[has_next] + cap[v_leg[has_next]], w_col,
            w_col, v_next[later], v_next[below] - 1, lambda_col[triple][multi[triple]]]
    vals = [np.ones(n_v), -np.ones(int(has_next.sum())), -np.ones(n_w),
            np.ones(n_w), pe[later], -pe[below], -pe[multi[triple]]]
    # one split row per (period, multi-leg product) with a request chance
    key = t_of[multi] * n + prod[multi]
    groups, group_of = np.unique(key, return_inverse=True)
    rows.append(n_v + n_w + group_of)
    cols.append(lambda_col[multi])
    vals.append(np.ones(n_lambda))
    n_rows = n_v + n_w + groups.size
    matrix = sp.csc_matrix(
        (np.concatenate(vals), (np.concatenate(rows), np.concatenate(cols))),
        shape=(n_rows, n_v + n_lambda + n_w),
    )
    split = fares[groups % n]
    row_lower = np.r_[np.zeros(n_v), np.where(multi[triple], 0.0, pe * fares[je]), split]
    row_upper = np.r_[np.full(n_v + n_w, np.inf), split]
    cost = np.zeros(n_v + n_lambda + n_w)
    open_legs = np.flatnonzero(cap > 0)
    cost[v_start[open_legs] + cap[open_legs] - 1] = 1.0  # v_i(t0, c_i)
    return cost, matrix, row_lower, row_upper, (t_of, leg, prod), lambda_col


#: Default ceiling on the hinge count (one column and one row each): small networks solve in well
#: under a second; the bundled example (115,800 hinges) did not finish in 15 minutes and the 200-period
#: public instances (230,000-370,000 hinges) take minutes to hours.
DEFAULT_MAX_HINGES = 50_000


def hinge_count(incidence: np.ndarray, prob: np.ndarray, capacity: np.ndarray) -> int:
    """Hinge columns of the program at full ``capacity``: seats times requested (period, product)."""
    requested = (prob > 0).sum(axis=0)  # periods in which each product may be requested
    return int((np.asarray(capacity) * (incidence @ requested)).sum())


def full_split(incidence: np.ndarray, fares: np.ndarray, n_periods: int, capacity: np.ndarray,
               triples, lambda_col: np.ndarray, primal: np.ndarray) -> np.ndarray:
    """``(L, T, n)`` multipliers: the LP's where it has them, else a split that loses nothing.

    A product through a leg with no seat left puts its fare on that leg (it can never sell);
    periods without a request chance split equally (they add nothing to any leg).
    """
    a = incidence.astype(np.float64)
    lam = np.broadcast_to((a / a.sum(axis=0) * fares)[:, None, :],
                          (a.shape[0], n_periods, a.shape[1])).copy()
    for j in np.flatnonzero(np.any((incidence > 0) & (capacity[:, None] == 0), axis=0)):
        lam[:, :, j] = 0.0
        lam[np.flatnonzero((incidence[:, j] > 0) & (capacity == 0))[0], :, j] = fares[j]
    t, leg, prod = triples
    multi = lambda_col >= 0
    lam[leg[multi], t[multi], prod[multi]] = np.maximum(primal[lambda_col[multi]], 0.0)
    # rescale the LP's shares (rounding) so each product's shares add up to its fare again
    total = np.einsum("itj,ij->tj", lam, a)
    lam *= np.where(total > 0, fares[None, :] / np.where(total > 0, total, 1.0), 1.0)[None]
    return lam


@register
class LagrangianLP(Solver):
    """The Lagrangian bound solved exactly as the compact piecewise-linear ALP (Kunnumkal &
    Talluri 2016; Topaloglu 2009)."""

    name = "lr-lp"
    # A bound and an exact reference for lr, not a policy: its bid prices are lr's at the
    # minimum, and re-solving one program per simulated state would take hours on any
    # network worth simulating.
    tags = Tags(upper_bound=True, capacity_dependent=True, control="")
    citation = (
        "S. Kunnumkal and K. Talluri (2016), On a piecewise-linear approximation for network "
        "revenue management, Mathematics of Operations Research 41(1):72-91; H. Topaloglu "
        "(2009), Using Lagrangian relaxation to compute capacity-dependent bid prices in "
        "network revenue management, Operations Research 57(3):637-649"
    )
    refusal = ProblemTooLargeError
    params = {
        **LP_PARAMS,
        "max_hinges": Param(DEFAULT_MAX_HINGES, "an integer >= 1", positive_int),
    }

    def accepts(self, network, demand) -> str | None:
        hinges = hinge_count(network.incidence, demand.probabilities, network.capacities)
        limit = self._checked_params()["max_hinges"]
        if hinges > limit:
            return (f"the program has {hinges:,} hinge columns, above max_hinges={limit:,}; raise "
                    "max_hinges to solve it anyway (minutes or more), or use lr")
        return None

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        net, cap = problem.network, problem.capacity
        prob = np.ascontiguousarray(problem.probabilities)
        cost, matrix, lower, upper, triples, lambda_col = lagrangian_program(
            net.incidence, net.fares, prob, cap)
        sol = solve_sparse_lp(cost, matrix, lower, upper, solver=params["solver"],
                              time_limit=params["time_limit"])
        if sol.status == "infeasible":
            # The program is feasible by construction (the leg DPs at any split satisfy it).
            # HiGHS's presolve has called it infeasible when request chances near 1e-11 sit
            # beside chances near 0.1 (the bundled example, 150 periods or more); without
            # presolve the same program solves.
            sol = solve_sparse_lp(cost, matrix, lower, upper, solver=params["solver"],
                                  time_limit=params["time_limit"], presolve=False)
        message = report_failure(self.name, "Lagrangian LP", sol)
        if sol.status not in ("optimal", "optimal_inaccurate"):
            return SolveOutput({"value": np.float64(np.nan)}, status=sol.status, message=message)
        lam = full_split(net.incidence, net.fares, prob.shape[0], cap, triples, lambda_col,
                         sol.primal)
        values = network_leg_values(prob, lam, net)
        bound = float(value_at(values, cap).sum())
        leg_value, table = leg_tables(values)
        return SolveOutput(
            variables={
                "value": np.float64(bound),
                "multiplier": lam.transpose(1, 0, 2),
                "leg_value": leg_value,
                "bid_price_table": table,
                "bid_price": bid_prices_at(table, cap),
            },
            status=sol.status,
            message="; ".join(m for m in (
                f"leg DPs at the LP multipliers give {bound:.8g}; LP objective {sol.value:.8g} "
                f"({params['solver']})", message) if m),
            payload={"lp_value": sol.value, "lp_seconds": sol.seconds},
        )
