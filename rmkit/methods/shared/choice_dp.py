"""The exact network DP under choice demand, over the whole capacity grid.

Model (Talluri & van Ryzin 2004, sec. 7.3; Liu & van Ryzin 2008, eq. (1)); with ``V_T = 0``::

    V_t(x) = V_{t+1}(x) + max_S sum_j P_tj(S) (f_j - V_{t+1}(x) + V_{t+1}(x - A_j)),

where S ranges over the sets of products with a seat on each of their legs at x. The sale
probabilities ``P_tj(S)`` do not depend on the state, so they are tabulated once per distinct
row of arrival probabilities and per subset of each component
(:mod:`rmkit.methods.shared.offer_sets`); the kernel (:mod:`rmkit.kernels.choice_dp`) sweeps the
grid period by period and stores the best set of every state as the decision bits of
:class:`~rmkit.results.StatePolicy` (bit j = product j offered), which the ``decisions`` control
replays.

Work is ``sum_c 2**n_c`` subsets x states x periods; problems above ``max_work`` (or whose decision
bits exceed ``max_memory_gb``) are refused up front with the figures.

>>> import numpy as np
>>> from rmkit import Network
>>> from rmkit.model.choice import ChoiceDemand
>>> net = Network.build([("L", 1)], [("lo", 100.0, ["L"]), ("hi", 300.0, ["L"])])
>>> dem = ChoiceDemand(np.array([[1.0]]), [[0, 1]], [[1.0, 1.0]], [0.0], 2)
>>> float(solve_choice_dp(net, dem).value_at([1]))  # offer hi alone: sold for sure
300.0
"""

from __future__ import annotations

import numpy as np

from rmkit.errors import InputError, ProblemTooLargeError
from rmkit.methods.shared.network_dp import (
    DEFAULT_MAX_MEMORY_GB,
    NetworkDP,
    _as_decision_bits,
    _word_dtype,
    grid_states,
    grid_strides,
)
from rmkit.methods.shared.offer_sets import component_refusal, offer_sets
from rmkit.model.demand import DemandModel, check_compatible
from rmkit.model.network import Network

#: Default refusal threshold of subsets x states x periods (about a minute on one core).
DEFAULT_MAX_WORK = 2e10
#: Most products the stored sets can name (one 64-bit word per state).
MAX_PRODUCTS = 64


def work_estimate(network: Network, demand: DemandModel, n_periods: int) -> tuple[int, int]:
    """``(subsets per state, bytes of decision bits)`` of a pass over ``n_periods`` periods."""
    from rmkit.methods.shared.offer_sets import components

    n_sets = sum(2 ** len(g) for g in components(demand))
    n_bytes = n_periods * network.state_space_size * ((network.n_products + 7) // 8)
    return n_sets, n_bytes


def too_large_reason(network: Network, demand: DemandModel, n_periods: int,
                     max_memory_gb: float = DEFAULT_MAX_MEMORY_GB,
                     keep_decisions: bool = True, max_work: float = DEFAULT_MAX_WORK
                     ) -> str | None:
    """``None`` when the choice DP fits both limits, else why not (with the figures)."""
    if network.n_products > MAX_PRODUCTS:
        return (f"the exact choice DP stores offer sets of at most {MAX_PRODUCTS} products, "
                f"the network has {network.n_products}; use cdlp or cdpd")
    comp = component_refusal(demand)
    if comp is not None:
        return f"the exact choice DP cannot enumerate the offer sets: {comp}; use cdlp"
    n_sets, n_bytes = work_estimate(network, demand, n_periods)
    states = network.state_space_size
    work = float(n_sets) * states * n_periods
    memory = (n_bytes if keep_decisions else 0) + 16 * states + 8 * states
    if work > max_work or memory > max_memory_gb * 2**30:
        return (f"the exact choice DP over {n_sets:,} offer sets x {states:,} states x "
                f"{n_periods} periods = {work:.3g} set evaluations and {memory / 2**30:.3g} GiB, "
                f"above the limits of {max_work:.3g} evaluations (max_work) and "
                f"{max_memory_gb:g} GiB (max_memory_gb); use a decomposition (cdpd) or cdlp")
    return None


def feasible_masks(network: Network) -> np.ndarray:
    """``(S,)`` uint64: bit j set where product j has a seat on each of its legs."""
    x = grid_states(network.capacities)
    a = np.asarray(network.incidence, dtype=np.int64)
    ok = np.all(x[:, :, None] >= a[None, :, :], axis=1)  # (S, n)
    bits = np.uint64(1) << np.arange(network.n_products, dtype=np.uint64)
    return (ok.astype(np.uint64) * bits[None, :]).sum(axis=1, dtype=np.uint64)


def solve_choice_dp(
    network: Network,
    demand: DemandModel,
    period: int = 0,
    *,
    keep_decisions: bool = True,
    probe: np.ndarray | None = None,
    max_memory_gb: float = DEFAULT_MAX_MEMORY_GB,
    max_work: float = DEFAULT_MAX_WORK,
) -> NetworkDP:
    """Backward induction from the last period down to ``period`` (see the module docstring)."""
    from rmkit.kernels.choice_dp import choice_values

    check_compatible(network, demand)
    if demand.kind != "choice":
        raise InputError(f"demand: the choice DP needs choice demand, got {demand.kind!r}")
    period = demand.check_period(period, "period")
    n_k = demand.n_periods - period
    reason = too_large_reason(network, demand, n_k, max_memory_gb, keep_decisions, max_work)
    if reason is not None:
        raise ProblemTooLargeError(reason)
    n_states = network.state_space_size
    probe_idx = np.zeros(0, dtype=np.int64) if probe is None else np.asarray(probe, np.int64)
    if probe_idx.size and (probe_idx.min() < 0 or probe_idx.max() >= n_states):
        raise InputError(f"probe: flat state indices must be in [0, {n_states - 1}]")
    sets = offer_sets(demand, period)  # type: ignore[arg-type]
    strides = grid_strides(network.capacities)
    offsets = (np.asarray(network.incidence, dtype=np.int64).T @ strides).astype(np.int64)
    word = _word_dtype(network.n_products)
    words = np.zeros((n_k, n_states) if keep_decisions else (1, 1), dtype=word)
    layers = np.zeros((2, n_states))
    probe_out = np.zeros((n_k, probe_idx.size))
    choice_values(*sets.arrays(), np.ascontiguousarray(network.fares, dtype=np.float64),
                  offsets, feasible_masks(network), layers, words, keep_decisions, probe_idx,
                  probe_out)
    bits = _as_decision_bits(words, n_states, network.n_products) if keep_decisions else None
    for a in (layers, bits, probe_out):
        if a is not None:
            a.setflags(write=False)
    return NetworkDP(network=network, period=period, n_periods=demand.n_periods,
                     values=layers[0], next_values=layers[1], decision_bits=bits,
                     strides=strides, probe=probe_idx, probe_values=probe_out)
