"""lr-rollout: a one-step rollout on the ``lr`` bid-price table (control ``rollout``).

See :class:`RolloutLagrangianRelaxation`; the relaxation is in :mod:`rmkit.methods.lr`, the
booking control in :mod:`rmkit.controls.rollout`.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.methods.base import Param, Problem, SolveOutput, Tags, positive_int, register
from rmkit.methods.lr import LagrangianRelaxation, non_negative_float, without


@register
class RolloutLagrangianRelaxation(LagrangianRelaxation):
    """One-step rollout on the ``lr`` bid-price table: a request is accepted when simulating the
    ``lr`` table policy on from both outcomes, over ``samples`` request streams of its own,
    says accepting pays (:mod:`rmkit.controls.rollout`).

    Rollout: D. P. Bertsekas, J. N. Tsitsiklis and C. Wu (1997), "Rollout algorithms for
    combinatorial optimization", Journal of Heuristics 3(3):245-262; its use on network revenue
    management decompositions: D. Bertsimas and I. Popescu (2003), "Revenue management in a
    dynamic network environment", Transportation Science 37(3):257-277. The base policy is the
    capacity- and time-dependent bid-price table of H. Topaloglu (2009), Operations Research
    57(3):637-649 (``lr``), re-solved as the simulation asks. The streams are drawn with the
    solve's seed (independent of the simulated customers); both branches of a decision are
    simulated on the same streams. The value is ``lr``'s bound.
    """

    name = "lr-rollout"
    tags = Tags(upper_bound=True, capacity_dependent=True, control="rollout")
    by_default = False
    params = {
        **LagrangianRelaxation.params,
        "samples": Param(64, "a whole number >= 1 (request streams of the rollout)",
                         positive_int),
        "z": Param(2.0, "a number >= 0 (standard errors of evidence the rollout needs to "
                   "overturn the lr table's own decision; 0: plain rollout)",
                   non_negative_float),
    }

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        if "samples" not in params:  # lr's own re-solve path: the streams are added after it
            return super()._solve(problem, params, seed)
        out = super()._solve(problem, without(params, "samples", "z"), seed)
        return _with_streams(out, problem, params, seed)

    def _resolve(self, problems, params, seeds, session) -> list[SolveOutput]:
        outs = super()._resolve(problems, without(params, "samples", "z"), seeds, session)
        return [_with_streams(o, p, params, s) for o, p, s in zip(outs, problems, seeds,
                                                                  strict=True)]


def _with_streams(out: SolveOutput, problem: Problem, params: dict[str, Any],
                  seed: int | None) -> SolveOutput:
    """The rollout's own request streams from the problem's period, drawn with the solve's seed
    shifted away from the simulator's customer streams of the same seed."""
    draw = np.random.SeedSequence([int(seed or 0), 0x0_0011_4F11]).generate_state(1)[0]
    streams = problem.demand.sample_streams(int(params["samples"]), int(draw))
    out.payload["rollout_streams"] = np.ascontiguousarray(streams[:, problem.period :],
                                                          dtype=np.int32)
    out.payload["rollout_z"] = float(params["z"])
    return out
