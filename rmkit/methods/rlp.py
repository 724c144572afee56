"""RLP: randomized linear programming bid prices (Talluri & van Ryzin 1999).

From period t with remaining capacity x, draw K demand-to-come vectors ``D^1 .. D^K`` from the
arrival model (request counts of each product over periods t..T-1, one sample path each) and solve
the network LP with each sample as the demand bound:

.. math::

    z_k = \\max_y f^\\top y \\quad \\text{s.t.} \\quad A y \\le x, \\quad 0 \\le y \\le D^k.

The bid prices are the average leg duals, ``pi = (1/K) sum_k pi^k``. Each ``z_k`` is the
perfect-hindsight LP value of path k (what could have been earned knowing the path's requests in
advance), so the reported value, the sample mean ``(1/K) sum_k z_k``, estimates the expected
perfect-hindsight value ``E[z(x, D)]``, an upper bound on the optimal expected revenue to go
(Talluri & van Ryzin 1999; 2004, section 3.3.3). ``value_stderr`` is its standard error
``s / sqrt(K)``. The same samples and the same LP model serve the ``ph`` bound (:mod:`.ph`).

Reference: K. T. Talluri and G. J. van Ryzin (1999), "A randomized linear programming method for
computing network bid prices", Transportation Science 33(2):207-216.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.errors import ProblemTooLargeError
from rmkit.methods.base import Param, Problem, SolveOutput, Solver, Tags, one_of, register
from rmkit.methods.dlp import DUAL_RULE, TIME_LIMIT_RULE, dual_message
from rmkit.methods.shared.network_lp import DUAL_CHOICES, LPBatch, raise_or_warn, time_limit_ok

DEFAULT_SAMPLES = 200  # our choice: standard error under 1% of the value on the benchmarks tried
MAX_SAMPLE_MEMORY_GB = 2.0


def at_least_two(v: Any) -> bool:
    return isinstance(v, (int, np.integer)) and not isinstance(v, bool) and v >= 2


def check_sample_memory(samples: int, n_periods: int, network) -> None:
    """Refuse up front when the sampled request streams and solutions would not fit."""
    per_sample = 12 * n_periods + 24 * network.n_products + 8 * network.n_legs  # bytes
    gigabytes = samples * per_sample / 2**30
    if gigabytes > MAX_SAMPLE_MEMORY_GB:
        raise ProblemTooLargeError(
            f"samples: {samples:,} samples over {n_periods} periods need about {gigabytes:.1f} "
            f"GiB for the request streams and LP solutions, above the limit of "
            f"{MAX_SAMPLE_MEMORY_GB:g} GiB; use fewer samples"
        )


def solve_sampled_lps(
    problem: Problem,
    samples: int,
    seed: int | None,
    *,
    duals: bool,
    dual: str = "highs",
    time_limit: float | None = None,
) -> LPBatch:
    """The network LP of ``samples`` sampled demand-to-come vectors, warm-started in turn."""
    from rmkit.methods.shared.network_lp import NetworkLP

    check_sample_memory(int(samples), problem.demand.n_periods, problem.network)

    draws = problem.demand.sample_demand_to_come(int(samples), int(seed or 0), problem.period)
    model = NetworkLP(problem.network, dual=dual, time_limit=time_limit)
    return model.solve_many(problem.capacity, draws.astype(np.float64), duals=duals)


def simulator_streams(problem: Problem, seed: int | None) -> bool:
    """Whether sample k of ``sample_streams(K, seed)`` from the problem's period is the request
    stream of path k of the simulator's ``sample_arrivals(N, seed)``: then a sampled bound's
    per-path values (payload ``path_values``, with ``paths_seed``) pair with a policy simulated
    with the same seed."""
    if seed is None or problem.period != 0:
        return False
    demand = problem.demand
    try:
        return bool(np.array_equal(demand.sample_streams(2, int(seed)),
                                   demand.sample_arrivals(2, int(seed)).customer))
    except (AttributeError, NotImplementedError):
        return False


def sample_mean_and_stderr(values: np.ndarray) -> tuple[float, float]:
    return float(values.mean()), float(values.std(ddof=1) / np.sqrt(values.size))


def batch_failure(method: str, batch: LPBatch) -> str | None:
    """Warn or raise for the first sample that did not solve; its status, else ``None``."""
    problem = batch.first_problem()
    if problem is None:
        return None
    k, status, message = problem
    raise_or_warn(method, status, f"sample {k}: {message}")
    return None if status == "optimal_inaccurate" else status


@register
class RandomizedLP(Solver):
    """Randomized LP bid prices (Talluri & van Ryzin 1999): averaged duals of sampled LPs."""

    name = "rlp"
    tags = Tags(upper_bound=True, stochastic=True, control="bid_price")
    solves_side_by_side = True  # a new HiGHS model per solve; HiGHS runs without the GIL
    citation = (
        "K. T. Talluri and G. J. van Ryzin (1999), A randomized linear programming method for "
        "computing network bid prices, Transportation Science 33(2):207-216"
    )
    params = {
        "samples": Param(DEFAULT_SAMPLES, "an integer >= 2", at_least_two),
        "dual": Param("highs", DUAL_RULE, one_of(*DUAL_CHOICES)),
        "time_limit": Param(None, TIME_LIMIT_RULE, time_limit_ok),
    }

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        batch = solve_sampled_lps(
            problem, params["samples"], seed, duals=True, dual=params["dual"],
            time_limit=params["time_limit"],
        )
        failed = batch_failure(self.name, batch)
        m, n = problem.network.n_legs, problem.network.n_products
        if failed is not None:
            return SolveOutput(
                variables={
                    "value": np.float64(np.nan),
                    "value_stderr": np.float64(np.nan),
                    "bid_price": np.full(m, np.nan),
                    "allocation": np.full(n, np.nan),
                },
                status=failed,
                message=batch.first_problem()[2],
            )
        value, stderr = sample_mean_and_stderr(batch.values)
        inaccurate = "optimal_inaccurate" in batch.statuses
        return SolveOutput(
            variables={
                "value": np.float64(value),
                "value_stderr": np.float64(stderr),
                "bid_price": batch.bid_prices.mean(axis=0),
                "allocation": batch.allocations.mean(axis=0),
            },
            status="optimal_inaccurate" if inaccurate else "optimal",
            message=f"{dual_message(params['dual'])}, averaged over {batch.values.size} samples",
            payload={"iterations": batch.iterations},
        )
