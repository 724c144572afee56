"""DLP-threshold: the re-solved fluid LP's primal allocation, rounded by a threshold.

Reference: P. Bumpensanti and H. Wang (2020), "A re-solving heuristic with uniformly bounded loss
for network revenue management", *Management Science* 66(7):2993-3009.

At each (re-)solve from period t with seats x the method solves the deterministic LP of
:mod:`rmkit.methods.dlp`,

.. math::

    \\max_y f^\\top y \\quad \\text{s.t.} \\quad A y \\le x, \\quad 0 \\le y \\le \\mu,

with ``mu_j`` the expected requests for product j still to come, and offers product j until the
next re-solve iff the share of its expected requests the LP accepts reaches the threshold,

.. math::

    y_j^* \\ge \\theta \\, \\mu_j \\qquad (\\theta = ``threshold``, default 1/2),

and it has the seats (the simulator checks that first). Re-solving at every period with the
acceptance probability ``y_j^* / mu_j`` instead is the probabilistic-allocation control of Jasin
& Kumar (2012); Bumpensanti & Wang (2020) show that such frequent re-solving can lose ``Omega(
sqrt(T))`` against the fluid bound in degenerate cases and that re-solving with the allocation
rounded to accept-all / reject-all by a threshold keeps the loss bounded uniformly in the scale.
This implementation keeps that control (round the fluid primal at each re-solve) and leaves the
re-solve schedule to the simulator (``resolve`` equally spaced re-solves; the paper re-solves
less and less often towards the end of the horizon, on a schedule of its own that is not
reproduced here), so it is the thresholded control of the paper on rmkit's re-solve schedule,
not a reproduction of its exact algorithm. Without re-solves it is a static partition of the
products into open and closed ones.

Control: ``cdlp_sets`` (one set offered over every period from the one solved from). Value: the
DLP bound at the state (its own estimate is the fluid value; it is kept as an upper bound would
be, but the method is tagged a heuristic and never serves as a yardstick).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.methods.base import Param, Problem, SolveOutput, Solver, Tags, one_of, register
from rmkit.methods.dlp import DUAL_RULE, TIME_LIMIT_RULE
from rmkit.methods.shared.network_lp import DUAL_CHOICES, raise_or_warn, time_limit_ok


def _threshold_ok(v: Any) -> bool:
    return (isinstance(v, (int, float)) and not isinstance(v, bool) and 0.0 < float(v) <= 1.0)


def offered(allocation: np.ndarray, expected: np.ndarray, threshold: float) -> np.ndarray:
    """``y_j >= threshold mu_j`` with a little rounding slack; products with no demand to come
    (``mu_j = 0``) stay open (they draw no requests)."""
    y = np.asarray(allocation, dtype=np.float64)
    mu = np.asarray(expected, dtype=np.float64)
    return y >= threshold * mu - 1e-9 * (1.0 + mu)


@register
class ThresholdedDLP(Solver):
    """The re-solved DLP's primal rounded by a threshold (Bumpensanti & Wang 2020)."""

    name = "dlp-threshold"
    tags = Tags(heuristic=True, control="cdlp_sets", gives_bid_prices=False)
    citation = (
        "P. Bumpensanti and H. Wang (2020), A re-solving heuristic with uniformly bounded loss "
        "for network revenue management, Management Science 66(7):2993-3009"
    )
    params = {
        "threshold": Param(0.5, "a number in (0, 1]", _threshold_ok),
        "dual": Param("highs", DUAL_RULE, one_of(*DUAL_CHOICES)),
        "time_limit": Param(None, TIME_LIMIT_RULE, time_limit_ok),
    }

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        return self._resolve([problem], params, [seed], None)[0]

    def _resolve(self, problems: list[Problem], params: dict[str, Any],
                 seeds: list[int | None], session) -> list[SolveOutput]:
        from rmkit.methods.shared.network_lp import NetworkLP

        model = NetworkLP(problems[0].network, dual=params["dual"],
                          time_limit=params["time_limit"])
        outs = []
        for problem in problems:
            mu = problem.demand_to_come
            sol = model.solve(problem.capacity, mu, cold=True)
            raise_or_warn(self.name, sol.status, sol.message)
            open_ = offered(sol.allocation, mu, float(params["threshold"]))
            n_left = problem.demand.n_periods - problem.period
            outs.append(SolveOutput(
                variables={"value": np.float64(sol.value), "allocation": sol.allocation},
                status=sol.status,
                message=(f"{int(open_.sum())} of {open_.size} products open (fluid share >= "
                         f"{float(params['threshold']):g})"),
                payload={"offer_sets": open_[None, :],
                         "offer_schedule": np.zeros(n_left, dtype=np.int64)},
            ))
        return outs
