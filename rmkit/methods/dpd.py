"""DPD: dynamic programming decomposition with displacement-adjusted leg fares.

References: K. T. Talluri and G. J. van Ryzin (2004), *The Theory and Practice of Revenue
Management*, Springer, section 3.4 (decomposition approaches); Q. Liu and G. van Ryzin (2008),
"On the choice-based linear programming model for network revenue management", *Manufacturing &
Service Operations Management* 10(2):288-310 (the decomposition in the independent-demand case).

Each leg i keeps its own seats and prices the rest of the network by the DLP leg duals
``mu`` at the state solved from: a request for product j counts on leg i for its fare less the
displacement of the other legs it uses, floored at zero,

.. math::

    r_{ij} = \\max\\bigl(0,\\ f_j - \\sum_{k \\in j,\\, k \\ne i} \\mu_k\\bigr),

and leg i solves the single-leg DP

.. math::

    v_i(t, x) = v_i(t+1, x) + \\sum_{j \\ni i} p_{tj} \\max(0, r_{ij} - (v_i(t+1, x) - v_i(t+1, x-1))).

The bid price of leg i for a request in period t with x seats left is
``v_i(t+1, x) - v_i(t+1, x-1)``: it depends on both the seats left and the time to go. With
``iterations > 1`` the duals are re-estimated from the leg value functions, ``mu_i`` becoming
the value of leg i's last seat at the state, ``v_i(t0, x_i) - v_i(t0, x_i - 1)`` (``+inf`` when
the leg is full), and the leg DPs are solved again with the new displaced fares.

The reported ``value`` is ``sum_i v_i(t0, x_i)``, an approximation of the network's value to go;
it is neither an upper nor a lower bound in general (the tags say heuristic).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.methods.base import Param, Problem, SolveOutput, Solver, Tags, one_of, positive_int, register
from rmkit.methods.dlp import leg_duals_many
from rmkit.methods.shared.leg_dp import bid_prices_at
from rmkit.methods.shared.network_lp import DUAL_CHOICES
from rmkit.methods.shared.workspace import Workspace, borrowed
from rmkit.model.network import Network


def displaced_fares(network: Network, duals: np.ndarray) -> np.ndarray:
    """``(L, n)`` leg fares ``max(0, f_j - sum of the other legs' duals)``; 0 off the product.

    A dual may be ``+inf`` (a full leg): the products through it then count for nothing on
    the other legs.
    """
    a = network.incidence > 0
    mu = np.asarray(duals, dtype=np.float64)
    out = np.zeros(a.shape)
    for i in range(network.n_legs):
        others = a.copy()
        others[i] = False
        displacement = np.where(others, mu[:, None], 0.0).sum(axis=0)
        out[i] = np.where(a[i], np.maximum(network.fares - displacement, 0.0), 0.0)
    return out


@register
class DPDecomposition(Solver):
    """DP decomposition (Talluri & van Ryzin 2004, sec. 3.4; Liu & van Ryzin 2008).

    K. T. Talluri and G. J. van Ryzin (2004), The Theory and Practice of Revenue Management,
    section 3.4; Q. Liu and G. van Ryzin (2008), On the choice-based linear programming model
    for network revenue management, MSOM 10(2):288-310. Leg DPs with fares reduced by the other
    legs' DLP duals; see the module docstring.
    """

    name = "dpd"
    tags = Tags(heuristic=True, capacity_dependent=True, control="table")
    citation = (
        "K. T. Talluri and G. J. van Ryzin (2004), The Theory and Practice of Revenue "
        "Management, Springer, sec. 3.4; Q. Liu and G. van Ryzin (2008), On the choice-based "
        "linear programming model for network revenue management, MSOM 10(2):288-310"
    )
    params = {
        "iterations": Param(1, "a whole number >= 1 (leg DP passes)", positive_int),
        "dual": Param("highs", "one of " + ", ".join(repr(c) for c in DUAL_CHOICES),
                      one_of(*DUAL_CHOICES)),
    }

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        return self._solve_period([problem], params, resolved=False)[0]

    def _resolve(self, problems, params, seeds, session) -> list[SolveOutput]:
        """States of the same period share every leg DP whose displaced fares they share: the
        duals are piecewise constant in the seats left, so a simulator's re-solve round solves
        far fewer leg DPs than states (the numbers are those of one solve per state)."""
        out: list[SolveOutput | None] = [None] * len(problems)
        by_period: dict[int, list[int]] = {}
        for q, problem in enumerate(problems):
            by_period.setdefault(problem.period, []).append(q)
        for members in by_period.values():
            done = self._solve_period([problems[q] for q in members], params, resolved=True)
            for q, one in zip(members, done, strict=True):
                out[q] = one
        session.count("states", len(problems))
        return out  # type: ignore[return-value]

    def _solve_period(self, problems: list[Problem], params: dict[str, Any], *, resolved: bool
                      ) -> list[SolveOutput]:
        """Solve states that start in the same period; each distinct (leg, displaced fares)
        DP is solved once, in one batched kernel call. A simulator's re-solve (``resolved``)
        leaves out ``leg_value``: its booking control reads the bid-price table only."""
        from rmkit.kernels.single_leg import gather_leg_tables

        network = problems[0].network
        prob = problems[0].probabilities
        x = np.stack([p.capacity for p in problems])  # (S, L)
        duals = leg_duals_many(problems, params["dual"])  # (S, L)
        with borrowed() as ws:  # the solved legs of a round: hundreds of MB on a large network
            for _ in range(params["iterations"]):
                fares = np.stack([displaced_fares(network, d) for d in duals])  # (S, L, n)
                solved, where = _shared_leg_values(prob, fares, network, ws)
                at = solved[where, 0, :]  # (S, L, cmax+1): each leg's values at the first period
                here = np.take_along_axis(at, x[:, :, None], axis=2)[:, :, 0]
                last = np.take_along_axis(at, np.maximum(x - 1, 0)[:, :, None], axis=2)[:, :, 0]
                duals = np.where(x > 0, here - np.where(x > 0, last, np.nan), np.inf)
            message = ("value: sum of the leg values at the state (an approximation, not a "
                       f"bound); {params['iterations']} leg DP pass(es) from the DLP duals "
                       f"({params['dual']})")
            shape = (prob.shape[0], network.max_capacity + 1, network.n_legs)
            outs = []
            for s in range(len(problems)):
                table_s = np.empty(shape)
                value_s = np.empty((0, 0, 0) if resolved else shape)
                gather_leg_tables(solved, where[s], table_s, value_s)
                kept = {} if resolved else {"leg_value": value_s}
                outs.append(SolveOutput(
                    variables={
                        "value": np.float64(here[s].sum()),
                        **kept,
                        "bid_price_table": table_s,
                        "bid_price": bid_prices_at(table_s, x[s]),
                        "net_fare": fares[s].copy(),
                    },
                    message=message,
                    owned=True,  # every array is this state's own
                ))
        return outs


def _shared_leg_values(prob: np.ndarray, fares: np.ndarray, network: Network, ws: Workspace
                       ) -> tuple[np.ndarray, np.ndarray]:
    """Leg values of S states' displaced fares ``(S, L, n)`` (constant over the periods), each
    distinct (leg, fares) pair solved once: ``(solved (U, T+1, cmax+1), where (S, L))`` with
    state s's leg i at ``solved[where[s, i]]``."""
    from rmkit.kernels.single_leg import leg_values_batch

    n_states, n_legs, _ = fares.shape
    rows, caps, where = [], [], np.empty((n_states, n_legs), dtype=np.int64)
    for i in range(n_legs):
        unique, inverse = np.unique(fares[:, i, :], axis=0, return_inverse=True)
        where[:, i] = len(rows) + inverse.ravel()
        rows.extend(unique)
        caps.extend([int(network.capacities[i])] * len(unique))
    # the fares are constant over the periods: a view with a zero period stride, not a copy
    # (hundreds of distinct legs x T x n would be over 100 MB per round on a 600-period network)
    virtual = np.broadcast_to(np.asarray(rows)[:, None, :],
                              (len(rows), prob.shape[0], network.n_products))
    solved = ws.empty("dpd.solved", (len(rows), prob.shape[0] + 1, network.max_capacity + 1))
    leg_values_batch(np.ascontiguousarray(prob), virtual, np.asarray(caps, dtype=np.int64),
                     solved)
    return solved, where
