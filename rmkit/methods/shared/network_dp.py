"""The exact network dynamic program on small networks, and what it tells about every state.

Model (Talluri & van Ryzin 2004, "The Theory and Practice of Revenue Management", Springer,
section 3.1): legs with capacities c, products j with fares f_j and leg-incidence columns A_j,
request probabilities p[t, j]. With ``V_T(x) = 0``::

    V_t(x) = V_{t+1}(x) + sum_j p[t, j] * max(0, f_j - (V_{t+1}(x) - V_{t+1}(x - A_j))),

where product j can only be sold when ``x - A_j >= 0``. The optimal policy accepts a request for
j in period t with x seats left iff it is feasible and ``f_j >= V_{t+1}(x) - V_{t+1}(x - A_j)``
(ties accept). The *leg marginal value* (exact bid price) of leg i in period t is
``V_{t+1}(x) - V_{t+1}(x - e_i)``, the *opportunity cost* of product j is
``V_{t+1}(x) - V_{t+1}(x - A_j)``; both are ``+inf`` where the seat or seats are not there.

The state grid is every ``0 <= x <= c`` for the network's full capacities c, flattened row-major
(last leg fastest): ``s = sum_i x_i * stride_i``. The kernels (``rmkit.kernels.network_dp``) sweep it
once per period; on one thread only two value layers live at once (the two-thread pipeline
keeps ``2 * batch + 1``, within ``PIPELINE_SLOT_BYTES``), plus the optimal decisions as bits.

Everything here first estimates memory and refuses problems above ``max_memory_gb``
(:class:`rmkit.errors.ProblemTooLargeError`), pointing at the decomposition methods.

>>> from rmkit import DemandModel, Network
>>> import numpy as np
>>> net = Network.build([("L", 1)], [("P", 10.0, ["L"])])
>>> dp = solve_network_dp(net, DemandModel(np.array([[0.3]])))
>>> float(dp.value_at([1]))
3.0
"""

from __future__ import annotations

import math
import os
import sys
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np

from rmkit import limits
from rmkit.errors import InputError, ProblemTooLargeError
from rmkit.model.demand import DemandModel, check_compatible
from rmkit.model.network import Network, grid_strides

#: Updates (state x product x period) per second assumed by the run-time estimate: a
#: conservative figure for this kernel on one core of a current x86 machine.
ESTIMATE_UPDATES_PER_SECOND = 1.5e9
#: A period's grid must hold this many updates before the two-thread pipeline is used: threads
#: meet once per batch of periods, and a batch must be long next to that hand-off.
PARALLEL_MIN_UPDATES = 40_000
DEFAULT_MAX_MEMORY_GB = 4.0
#: States swept at a time by the kernel, so the tile being updated stays in the L1 cache.
DEFAULT_TILE = 1024
#: Periods per batch of the two-thread pipeline, and the memory its extra value slots may take.
PIPELINE_BATCH = 8
PIPELINE_SLOT_BYTES = 64 * 2**20


def pipeline_slots(n_states: int) -> tuple[int, int]:
    """``(batch, slots)`` of the two-thread pipeline: ``slots = 2 * batch + 1`` value layers."""
    fit = (PIPELINE_SLOT_BYTES // (8 * max(n_states, 1)) - 1) // 2
    batch = max(1, min(PIPELINE_BATCH, fit))
    return batch, 2 * batch + 1


# ------------------------------------------------------------------ grid
def flat_index(capacity: np.ndarray, strides: np.ndarray) -> np.ndarray:
    """Flat grid index of capacity vectors (shape ``(..., m)`` -> ``(...)``)."""
    return np.asarray(capacity, dtype=np.int64) @ strides


def grid_states(capacities: np.ndarray) -> np.ndarray:
    """``(S, m)`` every capacity vector of the grid, in flat-index order."""
    sizes = [int(c) + 1 for c in capacities]
    return np.stack(np.unravel_index(np.arange(math.prod(sizes)), sizes), axis=1).astype(np.int64)


@dataclass(frozen=True)
class _Layout:
    """Grid facts the kernels need (see :mod:`rmkit.kernels.network_dp`).

    Product j's feasible states, as far as the legs other than the last go, are runs of
    consecutive flat indices. With l the last of j's legs other than the last leg, fixing
    ``x_0 .. x_{l-1}`` (each >= 1 on the legs of j) leaves the run of states with ``x_l >= 1``:
    ``[base + stride_l, base + (c_l + 1) stride_l)``. A product using only the last leg has the
    single run ``[1, S)``. The last leg's own condition is the ``mask``.
    """

    strides: np.ndarray
    offsets: np.ndarray  # uint64 d_j = A_j . strides
    masked: np.ndarray  # uint8: j uses the last leg
    pair: np.ndarray  # uint8: j and j + 1 use the same legs and share a pass (see the kernels)
    run_start: np.ndarray  # uint64
    run_stop: np.ndarray  # uint64
    run_ptr: np.ndarray  # int64 (n + 1,): runs of j are run_ptr[j] .. run_ptr[j+1]-1
    mask: np.ndarray  # float64 (S,): 1.0 where x_last >= 1
    umask: np.ndarray  # uint8 (S,): 1 where x_last >= 1
    n_states: int


def _product_runs(caps: np.ndarray, strides: np.ndarray, legs: np.ndarray) -> np.ndarray:
    """``(runs, 2)`` start/stop of the flat-index runs where the non-last legs of a product fit."""
    m = caps.size
    others = legs[legs < m - 1]
    total = int(strides[0] * (caps[0] + 1))
    uses_last = bool(np.any(legs == m - 1))
    if others.size == 0:  # only the last leg: s - 1 must exist
        return np.array([[1, total]], dtype=np.int64)
    last = int(others.max())
    ranges = [
        np.arange(1 if i in others else 0, int(caps[i]) + 1, dtype=np.int64) for i in range(last)
    ]
    if ranges:
        mesh = np.meshgrid(*ranges, indexing="ij")
        base = sum(g.ravel() * strides[i] for i, g in enumerate(mesh))
        base = np.asarray(base, dtype=np.int64).ravel()
    else:
        base = np.zeros(1, dtype=np.int64)
    # A run opens at x_last = 0; a product on the last leg cannot sell there, and skipping that
    # state keeps s - d_j >= 0 inside the run.
    start = base + strides[last] + int(uses_last)
    stop = base + (caps[last] + 1) * strides[last]
    return np.stack([start, stop], axis=1)


def _pairs(a: np.ndarray) -> np.ndarray:
    """``pair[j] = 1`` where products j and j + 1 use the same legs (greedy, left to right).

    Such neighbours (fare classes of one itinerary, usually listed together) share the
    opportunity cost, so the kernel reads it once for both. Pairs never straddle a 64-product
    decision word.
    """
    n = a.shape[1]
    pair = np.zeros(n, dtype=np.uint8)
    j = 0
    while j < n - 1:
        if np.array_equal(a[:, j], a[:, j + 1]) and (j + 1) % 64 != 0:
            pair[j] = 1
            j += 2
        else:
            j += 1
    return pair


def _layout(network: Network) -> _Layout:
    caps = network.capacities
    a = network.incidence
    strides = grid_strides(caps)
    n_states = network.state_space_size
    runs = [_product_runs(caps, strides, np.flatnonzero(a[:, j])) for j in range(a.shape[1])]
    ptr = np.zeros(len(runs) + 1, dtype=np.int64)
    ptr[1:] = np.cumsum([r.shape[0] for r in runs])
    allruns = np.concatenate(runs, axis=0)
    on = (np.arange(n_states) % (int(caps[-1]) + 1)) >= 1
    return _Layout(
        pair=_pairs(a),
        strides=strides,
        offsets=(a.T @ strides).astype(np.uint64),
        # one leg: every run lies within the single row, past x = 0, so no mask is needed
        masked=(a[-1] if network.n_legs > 1 else np.zeros_like(a[-1])).astype(np.uint8),
        run_start=np.ascontiguousarray(allruns[:, 0]).astype(np.uint64),
        run_stop=np.ascontiguousarray(allruns[:, 1]).astype(np.uint64),
        run_ptr=ptr,
        mask=on.astype(np.float64),
        umask=on.astype(np.uint8),
        n_states=n_states,
    )


# ------------------------------------------------------------------ estimate
@dataclass(frozen=True)
class DPEstimate:
    """What a solve will cost, known before anything is allocated."""

    n_states: int
    n_periods: int
    n_products: int
    bytes: int
    seconds: float

    @property
    def gigabytes(self) -> float:
        return self.bytes / 2**30

    def describe(self) -> str:
        return (
            f"{self.n_states:,} states x {self.n_periods} periods x {self.n_products} products "
            f"needs about {self.gigabytes:.3g} GiB and {self.seconds:.3g} s"
        )


def estimate(
    network: Network,
    n_periods: int,
    keep_decisions: bool = True,
    n_probe: int = 0,
) -> DPEstimate:
    """Memory (bytes) and run time of a backward pass over ``n_periods`` periods."""
    s = network.state_space_size
    n = network.n_products
    layers = pipeline_slots(s)[1] if s * n >= PARALLEL_MIN_UPDATES else 2
    size = (layers + 1) * 8 * s + s + 8 * n_periods * n_probe  # values, masks, probes
    if keep_decisions:
        size += n_periods * s * ((n + 7) // 8)
    seconds = s * n * n_periods / ESTIMATE_UPDATES_PER_SECOND
    return DPEstimate(s, n_periods, n, int(size), seconds)


def too_large_reason(
    network: Network,
    n_periods: int,
    max_memory_gb: float = DEFAULT_MAX_MEMORY_GB,
    keep_decisions: bool = True,
    n_probe: int = 0,
) -> str | None:
    """``None`` when the DP fits in ``max_memory_gb``, else why not (with the figures)."""
    est = estimate(network, n_periods, keep_decisions, n_probe)
    if est.gigabytes <= max_memory_gb:
        free = limits.available_memory()  # the limit may be set above what the machine has
        if free is None or est.bytes <= limits.AVAILABLE_SHARE * free:
            return None
        return (
            f"the exact network DP over {est.describe()}, above the {limits.gib(free)} of memory "
            f"available (limit max_memory_gb = {max_memory_gb:g} GiB); use a decomposition "
            "method instead (dpd, lr)"
        )
    return (
        f"the exact network DP over {est.describe()}, above the limit of {max_memory_gb:g} GiB "
        "(parameter max_memory_gb); use a decomposition method instead (dpd, lr)"
    )


def check_size(
    network: Network,
    n_periods: int,
    max_memory_gb: float = DEFAULT_MAX_MEMORY_GB,
    keep_decisions: bool = True,
    n_probe: int = 0,
) -> DPEstimate:
    """Raise :class:`ProblemTooLargeError` when the DP would not fit; else return the estimate."""
    reason = too_large_reason(network, n_periods, max_memory_gb, keep_decisions, n_probe)
    if reason is not None:
        raise ProblemTooLargeError(reason)
    return estimate(network, n_periods, keep_decisions, n_probe)


# ------------------------------------------------------------------ solve
@dataclass(frozen=True, eq=False)
class NetworkDP:
    """A solved network DP from period ``period`` on.

    Attributes
    ----------
    values, next_values
        ``(S,)`` V at the first period solved and at the next one, over the whole grid.
    decision_bits
        ``(T - period, S, ceil(n/8))`` uint8, or None: bit ``j % 8`` of byte ``j // 8`` is 1 iff
        accepting j in period ``period + k`` at flat state s is optimal.
    strides
        ``(m,)`` grid strides over the full capacities.
    probe, probe_values
        Flat indices asked for and ``(T - period, len(probe))``: ``V_{period+k+1}`` there.
    """

    network: Network
    period: int
    n_periods: int
    values: np.ndarray
    next_values: np.ndarray
    decision_bits: np.ndarray | None
    strides: np.ndarray
    probe: np.ndarray
    probe_values: np.ndarray

    def value_at(self, capacity: Sequence[int] | np.ndarray) -> float:
        """V at the first period solved, with ``capacity`` seats left."""
        x = self.network.check_capacity(capacity, "capacity")
        return float(self.values[flat_index(x, self.strides)])

    def bid_prices_at(self, capacity: Sequence[int] | np.ndarray) -> np.ndarray:
        """Leg marginal values ``V_{t0+1}(x) - V_{t0+1}(x - e_i)``, +inf where ``x_i = 0``."""
        x = self.network.check_capacity(capacity, "capacity")
        return _differences(self.next_values, x, np.eye(x.size, dtype=np.int64), self.strides)

    def opportunity_costs_at(self, capacity: Sequence[int] | np.ndarray) -> np.ndarray:
        """Product opportunity costs ``V_{t0+1}(x) - V_{t0+1}(x - A_j)``, +inf when infeasible."""
        x = self.network.check_capacity(capacity, "capacity")
        return _differences(self.next_values, x, self.network.incidence.T, self.strides)


def _differences(layer: np.ndarray, x: np.ndarray, moves: np.ndarray, strides: np.ndarray):
    s = int(flat_index(x, strides))
    out = np.full(moves.shape[0], np.inf)
    ok = np.all(x[None, :] >= moves, axis=1)
    out[ok] = layer[s] - layer[s - moves[ok] @ strides]
    return out


def _thread_count() -> int:
    import numba

    return int(numba.get_num_threads())


def _idle_cores(n_threads: int) -> float:
    """Cores not already busy, by the one-minute load average (all of them where unknown)."""
    try:
        return n_threads - os.getloadavg()[0]
    except (AttributeError, OSError):  # pragma: no cover - platforms without a load average
        return float(n_threads)


def _use_threads(n_states: int, n_products: int) -> bool:
    """Split periods over threads only when it pays.

    Every period ends in a barrier across threads. That costs microseconds on an idle machine,
    but on one whose cores are already taken a descheduled thread holds every period up by a
    scheduler time slice, so then one thread is faster.
    """
    n_threads = _thread_count()
    if n_threads < 2 or n_states * n_products < PARALLEL_MIN_UPDATES:
        return False
    return _idle_cores(n_threads) >= 1.0


def _word_dtype(n_products: int) -> np.dtype:
    """Smallest unsigned word holding one state's decisions (whole bytes, little-endian)."""
    if sys.byteorder != "little":  # words must read as bytes in order: bit j%8 of byte j//8
        return np.dtype(np.uint8)
    n_bytes = -(-n_products // 8)
    for dt in (np.uint8, np.uint16, np.uint32):
        if n_bytes <= np.dtype(dt).itemsize:
            return np.dtype(dt)
    return np.dtype(np.uint64)


def _as_decision_bits(words: np.ndarray, n_states: int, n_products: int) -> np.ndarray:
    """``(K, S, ceil(n/8))`` uint8 decision bytes from the kernel's ``(K, S * n_words)`` words."""
    n_bytes = -(-n_products // 8)
    raw = words.reshape(words.shape[0], n_states, -1).view(np.uint8)
    return raw if raw.shape[2] == n_bytes else np.ascontiguousarray(raw[:, :, :n_bytes])


@dataclass
class BackwardPass:
    """The kernel's inputs and zeroed outputs for one backward pass (see :func:`prepare`)."""

    layout: _Layout
    args: tuple
    layers: np.ndarray  # (slots, S): slot 0 = V at the first period solved, slot 1 = the next
    words: np.ndarray
    probe_out: np.ndarray
    parallel: bool
    split: int
    batch: int

    def run(self) -> None:
        """Run the kernel once (outputs must be zero, as :func:`prepare` leaves them)."""
        from rmkit.kernels import network_dp as kern

        if self.parallel:
            (prob, fare, offsets, masked, pair, starts, stops, ptr, mask, word_mask, layers,
             words, word_bit, keep, probe, probe_out, tile) = self.args
            kern.network_values(
                prob, fare, offsets, masked, pair, starts, stops, ptr, mask, word_mask, layers,
                self.layers.shape[0], words, word_bit, keep, probe, probe_out, tile,
                np.uint64(self.split), self.batch,
            )
        else:
            kern.network_values_serial(*self.args)

    def reset(self) -> None:
        """Zero the outputs again, so the pass can be run (and timed) once more."""
        for a in (self.layers, self.words, self.probe_out):
            a.fill(0)


def _balanced_split(lay: _Layout) -> int:
    """The flat index that halves the kernel's work (state x product updates) between threads."""
    n = lay.n_states
    load = np.zeros(n + 1, dtype=np.int64)
    np.add.at(load, lay.run_start.astype(np.int64), 1)
    np.add.at(load, lay.run_stop.astype(np.int64), -1)
    per_state = np.cumsum(load[:-1]) + 1  # + 1: the copy of every state
    done = np.cumsum(per_state)
    return int(np.searchsorted(done, done[-1] / 2))


def prepare(
    network: Network,
    demand: DemandModel,
    period: int,
    keep_decisions: bool,
    probe: np.ndarray,
    tile: int = DEFAULT_TILE,
    parallel: bool = False,
) -> BackwardPass:
    """Allocate and lay out one backward pass (no size check: callers check first)."""
    lay = _layout(network)
    prob = np.ascontiguousarray(demand.sale_probabilities(None, period))
    fare = np.ascontiguousarray(np.broadcast_to(network.fares, prob.shape))
    n_k = prob.shape[0]
    word = _word_dtype(network.n_products)
    per_word = 8 * word.itemsize
    n_words = -(-network.n_products // per_word)
    words = np.zeros((n_k, lay.n_states * n_words) if keep_decisions else (1, 1), dtype=word)
    shift = (np.arange(network.n_products) % per_word).astype(np.uint64)
    word_bit = (np.ones(network.n_products, dtype=np.uint64) << shift).astype(word)
    word_mask = np.where(lay.mask > 0, np.iinfo(word).max, 0).astype(word)
    batch, slots = pipeline_slots(lay.n_states) if parallel else (1, 2)
    layers = np.zeros((slots, lay.n_states))
    probe_out = np.zeros((n_k, probe.size))
    args = (prob, fare, lay.offsets, lay.masked, lay.pair, lay.run_start, lay.run_stop,
            lay.run_ptr, lay.mask, word_mask, layers.reshape(-1), words, word_bit, keep_decisions,
            probe.astype(np.uint64), probe_out, np.uint64(tile))
    split = _balanced_split(lay) if parallel else lay.n_states
    return BackwardPass(lay, args, layers, words, probe_out, parallel, split, batch)


def solve_network_dp(
    network: Network,
    demand: DemandModel,
    period: int = 0,
    *,
    keep_decisions: bool = True,
    probe: np.ndarray | None = None,
    max_memory_gb: float = DEFAULT_MAX_MEMORY_GB,
    parallel: bool | None = None,
    tile: int = DEFAULT_TILE,
) -> NetworkDP:
    """Backward induction over the whole grid from the last period down to ``period``.

    Parameters
    ----------
    keep_decisions
        Keep the optimal accept/reject bits for every period and state.
    probe
        Flat state indices whose value ``V_{t+1}`` to record for every period t.
    max_memory_gb
        Refuse (:class:`ProblemTooLargeError`) above this estimate.
    parallel
        Split each period over threads; ``None`` decides from the grid size and how busy the
        machine is (results are identical either way).
    tile
        States the kernel sweeps at a time (a cache-blocking size; results do not depend on it).
    """
    check_compatible(network, demand)
    period = demand.check_period(period, "period")
    probe_idx = np.zeros(0, dtype=np.int64) if probe is None else np.asarray(probe, np.int64)
    check_size(network, demand.n_periods - period, max_memory_gb, keep_decisions, probe_idx.size)
    n_states = network.state_space_size
    if probe_idx.size and (probe_idx.min() < 0 or probe_idx.max() >= n_states):
        raise InputError(f"probe: flat state indices must be in [0, {n_states - 1}]")
    if isinstance(tile, bool) or not isinstance(tile, (int, np.integer)) or tile < 1:
        raise InputError(f"tile: must be a whole number >= 1, got {tile!r}")
    if parallel is None:
        parallel = _use_threads(n_states, network.n_products)
    bp = prepare(network, demand, period, keep_decisions, probe_idx, int(tile), bool(parallel))
    bp.run()
    bits = _as_decision_bits(bp.words, n_states, network.n_products) if keep_decisions else None
    values, spare = bp.layers[0], bp.layers[1]  # slots of the first two periods solved
    for a in (values, spare, bits, bp.probe_out):
        if a is not None:
            a.setflags(write=False)
    return NetworkDP(
        network=network,
        period=period,
        n_periods=demand.n_periods,
        values=values,
        next_values=spare,
        decision_bits=bits,
        strides=bp.layout.strides,
        probe=probe_idx,
        probe_values=bp.probe_out,
    )


# ------------------------------------------------------------------ marginal values
def marginal_values(
    network: Network,
    demand: DemandModel,
    periods: np.ndarray,
    states: np.ndarray,
    max_memory_gb: float = DEFAULT_MAX_MEMORY_GB,
    solve: Callable[..., NetworkDP] | None = None,
) -> tuple[np.ndarray, np.ndarray]:
    """Exact leg marginal values ``(K, m)`` and product opportunity costs ``(K, n)`` at K pairs.

    ``solve`` is the backward pass (default :func:`solve_network_dp`; another demand kind passes
    its own DP with the same keywords).

    Pair q is (period ``t = periods[q]``, seats left ``x = states[q]``): leg i's value
    ``V_{t+1}(x) - V_{t+1}(x - e_i)`` and product j's ``V_{t+1}(x) - V_{t+1}(x - A_j)``, ``+inf``
    where the seat (or one of the product's seats) is not there. One backward pass from period 0
    records ``V_{t+1}`` at the states needed, so asking for many pairs costs one solve.
    """
    periods = np.asarray(periods, dtype=np.int64)
    x = np.asarray(states, dtype=np.int64).reshape(-1, network.n_legs)
    if periods.shape != (x.shape[0],):
        raise InputError(f"periods: needs one period per state ({x.shape[0]}), got shape "
                         f"{periods.shape}")
    if periods.size and (periods.min() < 0 or periods.max() >= demand.n_periods):
        raise InputError(f"periods: must be in [0, {demand.n_periods - 1}]")
    for q in range(x.shape[0]):
        network.check_capacity(x[q], f"states[{q}]")
    moves = np.concatenate([np.eye(network.n_legs, dtype=np.int64),
                            np.asarray(network.incidence, dtype=np.int64).T])  # (m + n, m)
    need = 8 * x.shape[0] * (2 * moves.shape[0] + 1)
    if need > max_memory_gb * 2**30:
        raise ProblemTooLargeError(
            f"{x.shape[0]:,} states x {moves.shape[0]} moves of marginal values need about "
            f"{need / 2**30:.3g} GiB, above max_memory_gb={max_memory_gb:g}; ask for fewer states"
        )
    strides = grid_strides(network.capacities)
    here = flat_index(x, strides)  # (K,)
    ok = np.all(x[:, None, :] >= moves[None, :, :], axis=2)  # (K, m + n)
    there = np.where(ok, here[:, None] - moves @ strides, here[:, None])
    wanted = np.unique(np.concatenate([here, there.ravel()]))
    dp = (solve or solve_network_dp)(network, demand, 0, keep_decisions=False, probe=wanted,
                                     max_memory_gb=max_memory_gb)
    values = dp.probe_values  # (T, U): V_{t+1} at the probed states
    rows = periods[:, None]
    diff = values[rows, np.searchsorted(wanted, here)[:, None]] - values[
        rows, np.searchsorted(wanted, there)]
    diff[~ok] = np.inf
    return diff[:, : network.n_legs], diff[:, network.n_legs :]
