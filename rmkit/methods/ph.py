"""PH: the expected perfect-hindsight value, an upper bound on the optimal expected revenue.

Knowing in advance every request of a sample path from period t on, the best revenue with
capacity x is at most the LP value ``z(x, D) = max {f'y : A y <= x, 0 <= y <= D}`` of the path's
demand-to-come vector D (equal to it when A is totally unimodular, as on hub-and-spoke networks).
Any booking policy earns at most that on every path, so

.. math::

    V_t(x) \\le E[z(x, D(t))] \\le z(x, E[D(t)]) = \\mathrm{DLP}(t, x),

the second inequality by Jensen (z is concave in D) (Talluri & van Ryzin 1999; 2004, section
3.3.3). The bound is estimated by the mean of K sampled LP values with standard error
``s / sqrt(K)``; samples are drawn with ``DemandModel.sample_demand_to_come`` and the LPs are
re-solves of one HiGHS model (:class:`rmkit.methods.shared.network_lp.NetworkLP`), each warm-started from
the last. A bound, not a policy: it gives no bid prices.

Reference: K. T. Talluri and G. J. van Ryzin (1999), "A randomized linear programming method for
computing network bid prices", Transportation Science 33(2):207-216.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.methods.base import Param, Problem, SolveOutput, Solver, Tags, register
from rmkit.methods.dlp import TIME_LIMIT_RULE
from rmkit.methods.rlp import (
    at_least_two,
    batch_failure,
    sample_mean_and_stderr,
    simulator_streams,
    solve_sampled_lps,
)
from rmkit.methods.shared.network_lp import time_limit_ok


@register
class PerfectHindsight(Solver):
    """Expected perfect-hindsight LP value (Talluri & van Ryzin 1999), sampled; an upper bound."""

    name = "ph"
    tags = Tags(upper_bound=True, stochastic=True, gives_bid_prices=False, control="")
    citation = (
        "K. T. Talluri and G. J. van Ryzin (1999), A randomized linear programming method for "
        "computing network bid prices, Transportation Science 33(2):207-216"
    )
    params = {
        "samples": Param(1000, "an integer >= 2", at_least_two),
        "time_limit": Param(None, TIME_LIMIT_RULE, time_limit_ok),
    }

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        batch = solve_sampled_lps(
            problem, params["samples"], seed, duals=False, time_limit=params["time_limit"]
        )
        failed = batch_failure(self.name, batch)
        if failed is not None:
            return SolveOutput(
                variables={"value": np.float64(np.nan), "value_stderr": np.float64(np.nan)},
                status=failed,
                message=batch.first_problem()[2],
            )
        value, stderr = sample_mean_and_stderr(batch.values)
        inaccurate = "optimal_inaccurate" in batch.statuses
        return SolveOutput(
            variables={"value": np.float64(value), "value_stderr": np.float64(stderr)},
            status="optimal_inaccurate" if inaccurate else "optimal",
            message=f"mean of {batch.values.size} sampled perfect-hindsight LP values",
            payload={"iterations": batch.iterations,
                     "path_values": np.asarray(batch.values, dtype=np.float64),
                     **({"paths_seed": int(seed)} if simulator_streams(problem, seed) else {})},
        )
