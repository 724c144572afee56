"""IR: an information-relaxation bound with a penalty built from the Lagrangian leg values.

References: D. B. Brown, J. E. Smith and P. Sun (2010), "Information relaxations and duality in
stochastic dynamic programs", *Operations Research* 58(4):785-801; D. B. Brown and J. E. Smith
(2014), "Information relaxations, duality, and convex stochastic dynamic programs", *Operations
Research* 62(6):1394-1415. The penalty's value functions come from H. Topaloglu (2009), *Operations
Research* 57(3):637-649 (``lr``).

The relaxation
--------------
Write a period's action as a decision rule ``u_t in {0,1}^n`` (accept j if it is requested,
``u_tj = 1`` only if ``x_t >= A_j``), chosen before the period's request ``k_t`` is seen; this is
the same problem as deciding after seeing the request. With an approximation ``W_t(x)`` of the
value function, the penalty of period t is

.. math::

    z_t = [r_t + W_{t+1}(x_{t+1})] - E[r_t + W_{t+1}(X_{t+1}) \\mid x_t, u_t],

the realized one-period reward plus next value, less its expectation over the period's request.
Under any non-anticipative policy ``u_t`` and ``x_t`` depend on ``k_0 .. k_{t-1}`` only and
``k_t`` is independent of them, so ``E[z_t] = E[E[z_t | k_0..k_{t-1}]] = 0``: subtracting
``sum_t z_t`` changes no such policy's expected revenue. Hence (Brown, Smith & Sun 2010, weak
duality) ``V_t0(c) <= E[max_{u anticipative} sum_t (r_t - z_t)]``: on each path the maximum is over
all decisions that know the whole request stream. Without the penalty this is the perfect
hindsight bound; with ``W = V`` it is tight with zero variance.

The penalty used: ``W_t(x) = sum_i v_i(t, x_i)``, the leg value functions of the Lagrangian
relaxation at the multipliers of ``lr`` (``lambda``, which split each fare over its legs). With
``Delta_i(x) = v_i(t+1, x) - v_i(t+1, x-1)`` one period of ``r_t - z_t`` is

.. math::

    \\sum_{j \\ne k_t} p_{tj} u_{tj} g_{tj}(x) + u_{t k_t} \\big(p_{t k_t} f_{k_t}
    + (1 - p_{t k_t}) \\textstyle\\sum_{i \\in k_t} \\Delta_i(x_i)\\big),
    \\qquad g_{tj} = f_j - \\sum_{i \\in j} \\Delta_i(x_i).

Why this penalty: the Lagrangian values are a supersolution of the network DP (``W_t(x) >=
E[r_t + W_{t+1}]`` for every x and u, by the leg DPs and the fare split), so every path's
penalised maximum is at most ``W_t0(c)``, the LR bound itself, whatever the decisions: the bound
can only improve on LR, and it does wherever the split ``(f_j - sum_i Delta_i)^+ <= sum_i
(lambda_ij - Delta_i)^+`` is loose at the states a path visits. Affine ALP values give the same
guarantee against the looser ALP bound; DLP duals give none.

The inner problem, per path
---------------------------
``inner="exact"`` (the default ``"auto"`` when the network has at most :data:`EXACT_STATES` seat
vectors) solves it by backward induction over every network state along the path: one period
costs ``O(states)`` given the realized request (kernel ``exact_path_bounds``).

``inner="lagrangian"`` (larger networks) bounds it from above instead. Bounding ``g_tj <=
sum_{i in j} (lambda_itj - Delta_i)^+`` for the products not requested (each leg open) and
giving each leg its own copy of the accept decision of the realized request, tied back by
multipliers ``eta`` that add to zero over the request's legs, makes the path problem separate by
legs: leg i runs a DP over its own seats along the path,

.. math::

    D_i(t, x) = U_i(t, x) + \\max\\big(D_i(t+1, x), \\; \\Delta_i(x) + p_{tk}(\\lambda_{itk}
    - \\Delta_i(x)) + \\eta_{it} + D_i(t+1, x-1)\\big)

(the max only when the period's request k uses leg i and ``x >= 1``), with ``U_i(t, x) = v_i(t,
x) - v_i(t+1, x) - p_tk (lambda_itk - Delta_i(x))^+`` (the other products' terms, by the leg DP
identity). For every ``eta`` the sum ``sum_i D_i(t0, c_i)`` bounds the path's maximum from above
(weak Lagrangian duality), so its sample mean estimates a valid upper bound without bias. At
``eta = 0`` every leg's problem is its own ideal-penalty problem and ``sum_i D_i = `` the LR bound
on every path (checked in the tests); projected subgradient steps on ``eta`` (``iterations``,
step ``step * fare / sqrt(k+1)``, ``fare`` the mean fare of multi-leg products) lower it, and
each path keeps its least value. When the legs agree on every request the dual is attained by a
joint decision: it is then the maximum of the split path problem (still an upper bound on the
exact inner maximum). The split gives back the looseness that makes LR a bound, so on the public
instances this variant improves on LR only marginally (benchmarks/bench_bounds.py); the exact
variant is what tightens, and it needs a small state space.

The estimate is the mean over ``samples`` request streams from ``DemandModel.sample_streams``
(the same paths as ``ph`` with the same seed and sample count) with standard error ``s/sqrt(K)``.
It is at most the LR bound of the multipliers used on every path (so at most ``lr``), and below
perfect hindsight wherever LR is (every public instance; Topaloglu 2009, Tables 1-2).
"""

from __future__ import annotations

from typing import Any

import numpy as np

from rmkit.methods.base import (
    Param,
    Problem,
    SolveOutput,
    Solver,
    Tags,
    one_of,
    positive_float,
    positive_int,
    register,
)
from rmkit.methods.rlp import (
    at_least_two,
    check_sample_memory,
    sample_mean_and_stderr,
    simulator_streams,
)
from rmkit.methods.shared.leg_dp import network_leg_values, product_legs, value_at


def lagrangian_penalty(problem: Problem) -> tuple[np.ndarray, np.ndarray]:
    """``(lambda (L, T, n), leg values (L, T+1, W))`` of ``lr`` at the problem's state."""
    import warnings

    from rmkit.methods.base import get_solver
    from rmkit.results import BookingState

    state = BookingState(problem.period, tuple(int(c) for c in problem.capacity))
    with warnings.catch_warnings():  # lr's own stopping status does not matter here
        warnings.simplefilter("ignore", RuntimeWarning)
        res = get_solver("lr").solve(problem.network, problem.demand, state=state)
    lam = np.ascontiguousarray(np.asarray(res["multiplier"]).transpose(1, 0, 2))
    prob = np.ascontiguousarray(problem.probabilities)
    return lam, network_leg_values(prob, lam, problem.network)


#: ``inner="auto"`` solves each path's problem exactly when the network has at most this many
#: states (seat vectors up to the state's capacity): one DP over all of them per path.
EXACT_STATES = 4096
#: ``inner="exact"`` refuses more states than this (its tables hold periods x states x products).
MAX_EXACT_STATES = 200_000
INNER_CHOICES = ("auto", "exact", "lagrangian")


def exact_bounds(problem: Problem, streams: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Per path: the penalised maximum by a DP over every network state (exact inner problem)."""
    from rmkit.kernels.information import exact_path_bounds, state_gains

    net = problem.network
    x0 = problem.capacity
    stride = np.r_[1, np.cumprod(x0 + 1)[:-1]].astype(np.int64)
    n_states = int(np.prod(x0 + 1))
    states = (np.arange(n_states)[:, None] // stride[None, :]) % (x0 + 1)[None, :]
    prob = np.ascontiguousarray(problem.probabilities)
    n_periods = prob.shape[0]
    gain = np.empty((n_periods, n_states, net.n_products))
    full = np.empty((n_periods, n_states))
    state_gains(values, prob, net.fares, np.ascontiguousarray(net.incidence),
                np.ascontiguousarray(states), gain, full)
    out = np.empty(streams.shape[0])
    exact_path_bounds(np.ascontiguousarray(streams), prob, net.fares, gain, full,
                      stride @ net.incidence, n_states - 1, out)
    return out


def penalised_bounds(problem: Problem, streams: np.ndarray, lam: np.ndarray, values: np.ndarray,
                     iterations: int, step: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per path: LR value (zero multipliers), the penalised bound, and whether it is exact."""
    from rmkit.kernels.information import penalised_path_bounds

    net = problem.network
    legs = product_legs(net)
    multi = net.incidence.sum(axis=0) > 1
    scale = float(net.fares[multi].mean()) if multi.any() else 0.0
    n_paths = streams.shape[0]
    first, best = np.empty(n_paths), np.empty(n_paths)
    agreed = np.empty(n_paths, dtype=np.bool_)
    penalised_path_bounds(
        np.ascontiguousarray(streams), values, lam, np.ascontiguousarray(problem.probabilities),
        legs, np.ascontiguousarray(problem.capacity), int(iterations), step * scale,
        first, best, agreed,
    )
    return first, best, agreed


@register
class InformationRelaxation(Solver):
    """Penalised perfect-information bound (Brown, Smith & Sun 2010; Brown & Smith 2014) with
    Lagrangian leg values (Topaloglu 2009) as the penalty."""

    name = "ir"
    tags = Tags(upper_bound=True, stochastic=True, gives_bid_prices=False, control="")
    citation = (
        "D. B. Brown, J. E. Smith and P. Sun (2010), Information relaxations and duality in "
        "stochastic dynamic programs, Operations Research 58(4):785-801; D. B. Brown and J. E. "
        "Smith (2014), Information relaxations, duality, and convex stochastic dynamic "
        "programs, Operations Research 62(6):1394-1415"
    )
    params = {
        "samples": Param(1000, "an integer >= 2", at_least_two),
        "iterations": Param(30, "an integer >= 1", positive_int),
        "step": Param(0.05, "a number > 0", positive_float),
        "inner": Param("auto", "one of " + ", ".join(repr(c) for c in INNER_CHOICES),
                       one_of(*INNER_CHOICES)),
    }

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        check_sample_memory(int(params["samples"]), problem.demand.n_periods, problem.network)
        streams = problem.demand.sample_streams(int(params["samples"]), int(seed or 0))
        streams = streams[:, problem.period :]
        lam, values = lagrangian_penalty(problem)
        lr_value = float(value_at(values, problem.capacity).sum())
        n_states = int(np.prod(problem.capacity + 1.0))
        exact = params["inner"] == "exact" or (params["inner"] == "auto"
                                               and n_states <= EXACT_STATES)
        if exact and n_states > MAX_EXACT_STATES:
            from rmkit.errors import ProblemTooLargeError

            raise ProblemTooLargeError(
                f"ir: inner='exact' needs a DP over {n_states:.3g} network states, above "
                f"{MAX_EXACT_STATES:,}; use inner='lagrangian' (or 'auto')")
        if exact:
            best = exact_bounds(problem, streams, values)
            agreed = np.ones(best.size, dtype=np.bool_)
            how = f"inner problem solved exactly on every path (DP over {n_states} states)"
        else:
            _, best, agreed = penalised_bounds(problem, streams, lam, values,
                                               params["iterations"], params["step"])
            how = (f"inner problem bounded by its Lagrangian dual over legs (split problem solved "
                   f"on {int(agreed.sum())} paths)")
        value, stderr = sample_mean_and_stderr(best)
        return SolveOutput(
            variables={"value": np.float64(value), "value_stderr": np.float64(stderr)},
            message=(f"mean of {best.size} penalised path bounds; LR bound of the penalty "
                     f"{lr_value:.6g}; {how}"),
            payload={"path_values": best, "exact_paths": agreed, "lr_value": lr_value,
                     # path k is path k of the simulator's streams with this seed: compare
                     # pairs the gap of a policy simulated with the same seed on them
                     **({"paths_seed": int(seed)} if simulator_streams(problem, seed) else {})},
        )
