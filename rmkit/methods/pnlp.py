"""PNLP: the probabilistic nonlinear program and its leg duals as bid prices.

From period t with remaining capacity x, let ``D_j`` be product j's demand to come. The program
(Williamson 1992; de Boer, Freling & Piersma 2002) allocates seats to products,

.. math::

    \\max_y \\sum_j f_j \\, E[\\min(D_j, y_j)] \\quad \\text{s.t.} \\quad A y \\le x,
    \\quad y \\ge 0,

counting only the requests a partitioned allocation can serve. ``E[min(D, y)]`` is concave in y,
and at whole numbers it is a sum of unit increments,

.. math::

    E[\\min(D, k)] = E[\\min(D, 0)] + \\sum_{u=1}^{k} \\delta_u, \\qquad
    \\delta_u = E[\\min(D, u)] - E[\\min(D, u-1)] = \\int_{u-1}^{u} P(D > s)\\, ds,

with ``delta`` non-increasing. So the program is written exactly over whole-number allocations as
a linear program in unit variables ``0 <= w_ju <= 1``, ``y_j = sum_u w_ju``, objective
``sum_j f_j (E[min(D_j, 0)] + sum_u delta_ju w_ju)``: because the increments fall, an optimum
fills units in order and the objective is the concave piecewise-linear interpolation of the
program between integers, equal to it at integers. Solved with HiGHS; the leg duals are the bid
prices. ``law`` picks D's distribution:

* ``"poisson"``: Poisson with the model's mean demand to come ``mu_j``; ``delta_u = P(D >= u)``
  and ``E[min(D, 0)] = 0``.
* ``"normal"``: normal with the model's mean and variance (``sum_t p_tj (1 - p_tj)``); with
  ``G(z) = phi(z) - z (1 - Phi(z))``, ``E[min(D, y)] = mu - sigma G((y - mu) / sigma)``.

Units are listed up to the smallest remaining capacity on the product's legs (at least one, so a
closed leg still prices its first seat) and stop where the increment falls below ``1e-12`` (those
units add nothing).

What the value is
-----------------
Not an upper bound: ``E[min(D, y)] <= min(E[D], y)`` (Jensen), so the objective is at most the DLP
value. At whole-number allocations it is the expected revenue of the *partitioned* allocation
policy (each product capped at ``y_j`` seats, no nesting) under the stated law; under the model's
own sum-of-Bernoullis law that revenue is even a little higher, since ``min(., y)`` is concave and
a sum of Bernoullis is less variable in convex order than the Poisson law of the same mean (our
derivation). The objective therefore carries no guarantee against the optimum in general and the
method is tagged a heuristic.

References: E. L. Williamson (1992), *Airline Network Seat Inventory Control: Methodologies and
Revenue Impacts*, PhD thesis, MIT; S. V. de Boer, R. Freling and N. Piersma (2002),
"Mathematical programming for network revenue management revisited", European Journal of
Operational Research 137(1):72-92.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.errors import ProblemTooLargeError
from rmkit.methods.base import Param, Problem, Search, SolveOutput, Solver, Tags, one_of, register
from rmkit.methods.dlp import TIME_LIMIT_RULE
from rmkit.methods.shared.network_lp import (
    FEASIBILITY_TOL,
    failure_message,
    map_status,
    quiet_highs,
    raise_or_warn,
    time_limit_ok,
)

LAWS = ("poisson", "normal")
NEGLIGIBLE = 1e-12  # increments below this add nothing to the objective
MAX_UNITS = 5_000_000  # unit columns HiGHS is asked to hold (a few hundred MB)
GRID_CELLS = 2_000_000  # Poisson tails computed in one call (products x units), ~16 MB


def unit_increments(
    law: str, mean: np.ndarray, var: np.ndarray, max_units: np.ndarray
) -> tuple[list[np.ndarray], np.ndarray]:
    """Per product: increments ``delta_1..delta_K`` (non-increasing) and ``E[min(D, 0)]``."""
    from scipy.stats import norm, poisson

    out: list[np.ndarray] = []
    base = np.zeros(mean.size)
    units = np.minimum(max_units, useful_units(law, mean, var))
    tails = None
    top = int(units.max(initial=0))
    if law == "poisson" and units.size * top <= GRID_CELLS:
        # every product's P(D >= u) in one call: the same elementwise function, far less
        # per-call overhead than a call per product (a re-solve round makes thousands)
        grid = np.arange(top, dtype=np.float64)
        tails = poisson.sf(grid[None, :], mean[:, None])
    for j, (mu, v, k) in enumerate(zip(mean, var, units, strict=True)):
        u = np.arange(1, int(k) + 1, dtype=np.float64)
        if law == "poisson":
            # P(D >= u) = P(D > u - 1)
            delta = tails[j, : int(k)] if tails is not None else poisson.sf(u - 1, mu)
        elif v <= 0.0:
            delta = np.clip(mu - (u - 1), 0.0, 1.0)  # degenerate law: D = mu
        else:
            s = float(np.sqrt(v))

            def loss(y: np.ndarray, mu: float = mu, s: float = s) -> np.ndarray:
                z = (y - mu) / s
                return norm.pdf(z) - z * norm.sf(z)

            grid = s * loss(np.r_[0.0, u])
            delta = np.maximum(grid[:-1] - grid[1:], 0.0)
            base[j] = mu - grid[0]
        keep = int(np.searchsorted(-delta, -NEGLIGIBLE, side="right"))
        out.append(delta[:keep])
    return out, base


def useful_units(law: str, mean: np.ndarray, var: np.ndarray) -> np.ndarray:
    """Per product, a unit count past which every increment is below :data:`NEGLIGIBLE`."""
    from scipy.stats import norm, poisson

    if law == "poisson":
        tail = poisson.isf(NEGLIGIBLE, mean)  # P(D > tail) <= NEGLIGIBLE
    else:
        tail = mean + norm.isf(NEGLIGIBLE) * np.sqrt(var)
    return np.ceil(np.nan_to_num(tail, nan=0.0)) + 2


def check_size(n_units: int) -> None:
    if n_units > MAX_UNITS:
        raise ProblemTooLargeError(
            f"pnlp: the piecewise-linear program would have {n_units:,} unit columns, above the "
            f"limit of {MAX_UNITS:,}; solve from a state with fewer seats left or use 'dlp'"
        )


@register
class ProbabilisticNLP(Solver):
    """Probabilistic nonlinear program (Williamson 1992; de Boer, Freling & Piersma 2002)."""

    name = "pnlp"
    tags = Tags(heuristic=True, control="bid_price")
    citation = (
        "E. L. Williamson (1992), Airline Network Seat Inventory Control: Methodologies and "
        "Revenue Impacts, PhD thesis, MIT; S. V. de Boer, R. Freling and N. Piersma (2002), "
        "Mathematical programming for network revenue management revisited, European Journal "
        "of Operational Research 137(1):72-92"
    )
    params = {
        "law": Param("poisson", "one of 'poisson', 'normal'", one_of(*LAWS),
                     Search("choice", "demand law of the program", LAWS)),
        "time_limit": Param(None, TIME_LIMIT_RULE, time_limit_ok),
    }

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        import highspy

        net = problem.network
        a, f, x = net.incidence, net.fares, problem.capacity.astype(np.float64)
        m, n = net.n_legs, net.n_products
        p = problem.probabilities
        mean = p.sum(axis=0)
        var = (p * (1.0 - p)).sum(axis=0)
        # At least one unit per product even on a closed leg, so that leg's row is not empty
        # and its dual is the price a first seat would have to beat, not a meaningless 0.
        max_units = np.maximum(np.where(a > 0, x[:, None], np.inf).min(axis=0), 1)
        check_size(int(np.minimum(max_units, useful_units(params["law"], mean, var)).sum()))
        deltas, base = unit_increments(params["law"], mean, var, max_units)
        if not any(d.size for d in deltas):
            return SolveOutput(
                variables={
                    "value": np.float64(f @ base),
                    "bid_price": np.zeros(m),
                    "allocation": np.zeros(n),
                },
                message=f"law: {params['law']}; no demand to come, so no seat has a value",
            )

        owner = np.repeat(np.arange(n), [d.size for d in deltas])
        cost = f[owner] * np.concatenate(deltas) if owner.size else np.zeros(0)
        legs_of = [np.flatnonzero(a[:, j]) for j in range(n)]
        lengths = np.array([legs_of[j].size for j in owner], dtype=np.int64)
        start = np.zeros(owner.size + 1, dtype=np.int32)
        np.cumsum(lengths, out=start[1:])
        index = (
            np.concatenate([legs_of[j] for j in owner]).astype(np.int32)
            if owner.size
            else np.zeros(0, dtype=np.int32)
        )
        h = quiet_highs()
        if params["time_limit"] is not None:
            h.setOptionValue("time_limit", float(params["time_limit"]))
        lp = highspy.HighsLp()
        lp.num_col_, lp.num_row_ = owner.size, m
        lp.col_cost_ = cost
        lp.col_lower_ = np.zeros(owner.size)
        lp.col_upper_ = np.ones(owner.size)
        lp.row_lower_ = np.full(m, -highspy.kHighsInf)
        lp.row_upper_ = x
        lp.sense_ = highspy.ObjSense.kMaximize
        lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
        lp.a_matrix_.start_, lp.a_matrix_.index_ = start, index
        lp.a_matrix_.value_ = np.ones(index.size)
        h.passModel(lp)
        h.run()
        status = map_status(h.getModelStatus())
        if status != "optimal":
            message = failure_message(
                "PNLP", status, h.modelStatusToString(h.getModelStatus())
            )
            raise_or_warn(self.name, status, message)
            return SolveOutput(
                variables={
                    "value": np.float64(np.nan),
                    "bid_price": np.full(m, np.nan),
                    "allocation": np.full(n, np.nan),
                },
                status=status,
                message=message,
            )
        sol = h.getSolution()
        w = np.array(sol.col_value)
        y = np.bincount(owner, weights=w, minlength=n)
        pi = np.array(sol.row_dual)
        value = float(h.getInfo().objective_function_value) + float(f @ base)
        status, message = "optimal", f"law: {params['law']}"
        worst = float(np.max(a @ y - x, initial=0.0))
        if worst > FEASIBILITY_TOL * max(1.0, float(x.max(initial=0.0))) or np.any(
            pi < -FEASIBILITY_TOL * float(f.max())
        ):
            status = "optimal_inaccurate"
            message += "; HiGHS's optimum fails its re-check (capacity or dual sign)"
        return SolveOutput(
            variables={
                "value": np.float64(value),
                "bid_price": np.maximum(pi, 0.0),
                "allocation": y,
            },
            status=status,
            message=message,
            payload={"iterations": int(h.getInfo().simplex_iteration_count)},
        )
