"""The policy simulator: booking controls replayed against sampled customers.

Every policy is replayed against the same customers drawn from the demand model's seeded sampler
(:meth:`~rmkit.model.demand.DemandModel.sample_arrivals`: each period's customer type and the one
uniform number that decides what she buys from whatever is on offer when she arrives), so two
policies simulated with the same seed meet exactly the same customers: their per-path revenue
differences are *paired* and their variance is smaller than that of two independent estimates
(common random numbers). What is on offer at a state is the control's business
(:mod:`rmkit.controls`); what the customer then does is the demand kind's
(:mod:`rmkit.kernels.replay`).

Statistics
----------
For per-path revenues ``R_1 .. R_n`` the estimate is the mean ``Rbar``, its standard error
``s / sqrt(n)`` with ``s`` the sample standard deviation, and the 95% confidence interval
``Rbar +- t_{0.975, n-1} s / sqrt(n)`` (Student t). Two policies a, b on the same paths are
compared (:func:`rmkit.workflows.policy_comparison.compare_policies`) through
``D_k = R_ak - R_bk``: mean ``Dbar``, paired standard error ``s_D / sqrt(n)``; the unpaired
standard error ``sqrt(s_a^2 + s_b^2) / sqrt(n)``, which ignores the pairing, is reported beside it
for contrast. ``Var(D) = s_a^2 + s_b^2 - 2 cov(a, b)``, so the paired one is smaller whenever the
two revenues are positively correlated, as they are when both face the same requests.

Re-optimisation
---------------
``resolve=K`` recomputes the policy's inputs at the K periods ``floor(k T / K)``, k = 0..K-1 (the
first period and every T/K periods after it), each from the path's seats left and the demand to
come from that period. Paths with the same seats left share one solve. ``resolve=0`` (or 1) solves
once, at period 0 from full capacity. ``resolve_every_sale`` also recomputes a ``bid_price`` or
``nested`` control right after each sale of a path; see :mod:`rmkit.workflows.policies` for what re-solving
means for each control type (a no-op for ``table``, ``exact`` and ``fcfs``).

Each solve gets a seed derived from (``seed``, period, seats left), so a path's outcome does not
depend on how many other paths run beside it: the first k paths of a long run equal a short run.

>>> from rmkit import DemandModel, Network
>>> net = Network.build(legs=[("L", 1)], products=[("P", 10.0, ["L"])])
>>> demand = DemandModel(np.array([[0.5], [0.5]]))
>>> demand.sample_arrivals(4, seed=0).customer.tolist()  # product asked for, -1 = nobody
[[-1, 0], [0, 0], [-1, -1], [-1, -1]]
>>> ds = simulate(net, demand, "fcfs", paths=4, seed=0)
>>> ds.revenue.values.tolist(), ds.no_purchase.values.ravel().tolist()  # path 1 refuses one
([10.0, 10.0, 0.0, 0.0], [0, 1, 0, 0])
"""

from __future__ import annotations

import json
import time
import warnings
from collections.abc import Mapping
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from rmkit._version import __version__
from rmkit.errors import InputError, ProblemTooLargeError
from rmkit.limits import MAX_SEED, memory_refusal, whole_rule
from rmkit.model.demand import Arrivals, DemandModel, check_compatible
from rmkit.model.network import Network, grid_strides, padded_rows
from rmkit.workflows.policies import PolicySource, make_policy
from rmkit.workflows.progress import Progress
from rmkit.workflows.stats import CONFIDENCE, summarize

#: Refuse runs whose per-path arrays would need more memory than this (bytes).
DEFAULT_MAX_BYTES = 4 * 2**30


# ---------------------------------------------------------------- schedule
def resolve_periods(n_periods: int, resolve: int) -> np.ndarray:
    """Periods ``floor(k T / K)``, k = 0..K-1, at which the policy is recomputed (K >= 1)."""
    k = max(int(resolve), 1)
    return np.unique(np.arange(k, dtype=np.int64) * n_periods // k)


def solve_seed(seed: int, period: int, capacity: np.ndarray) -> int:
    """A solve's seed as a function of the run's seed and the state alone."""
    entropy = [int(seed), int(period), *(int(v) for v in capacity)]
    return int(np.random.SeedSequence(entropy).generate_state(1, np.uint32)[0])


# ---------------------------------------------------------------- engine
@dataclass
class Outcome:
    """Per-path results of one policy, plus how the run went."""

    label: str
    control: str
    parameters: dict[str, Any]
    revenue: np.ndarray
    accepted: np.ndarray
    no_purchase: np.ndarray
    seats_left: np.ndarray
    solves: int = 0
    solve_seconds: float = 0.0
    seconds: float = 0.0
    every_sale: bool = False
    resolve_periods: list[int] = field(default_factory=list)
    statuses: dict[str, int] = field(default_factory=dict)
    trace: np.ndarray | None = None
    assumes_independent_demand: str = ""  # the view's approximation (rmkit.methods.base.Tags)
    summary: str = ""


@dataclass
class _Book:
    """Mutable per-path state the kernel updates in place."""

    seats: np.ndarray
    revenue: np.ndarray
    accepted: np.ndarray
    lost: np.ndarray
    memo: np.ndarray
    next_period: np.ndarray

    @classmethod
    def start(cls, network: Network, n_paths: int, n_types: int) -> _Book:
        n = network.n_products
        return cls(
            seats=np.tile(np.asarray(network.capacities, dtype=np.int64), (n_paths, 1)),
            revenue=np.zeros(n_paths),
            accepted=np.zeros((n_paths, n), dtype=np.int64),
            lost=np.zeros((n_paths, n_types), dtype=np.int64),
            memo=np.zeros((n_paths, 0), dtype=np.int64),
            next_period=np.zeros(n_paths, dtype=np.int64),
        )

    def room_for_memory(self, width: int) -> None:
        if self.memo.shape[1] < width:
            grown = np.zeros((self.memo.shape[0], width), dtype=np.int64)
            grown[:, : self.memo.shape[1]] = self.memo
            self.memo = grown

    def arrays(self) -> tuple[np.ndarray, ...]:
        return (self.seats, self.revenue, self.accepted, self.lost, self.memo, self.next_period)


@dataclass(frozen=True)
class FixedOfferLoop:
    """The arrays of the loop for a fixed offer (:mod:`rmkit.kernels.fixed_offer`)."""

    fare: np.ndarray
    legs: np.ndarray

    @classmethod
    def start(cls, network: Network) -> FixedOfferLoop:
        """Fares and leg lists with a row n for "no customer" (fare 0), padded with the spare
        leg m instead of -1 (the kernel's seat array has m + 1 entries)."""
        n, m = network.n_products, network.n_legs
        fare = np.zeros(n + 1)
        fare[:-1] = network.fares
        own = padded_rows(network.incidence.T)
        legs = np.full((n + 1, own.shape[1]), m, dtype=np.int64)
        legs[:-1] = np.where(own < 0, m, own)
        return cls(fare, legs)

    def replay(self, offer: np.ndarray, customer: np.ndarray, paths: np.ndarray, stop: int,
               book: _Book) -> None:
        from rmkit.kernels.fixed_offer import replay_fixed_offer, replay_fixed_offer_parallel
        from rmkit.kernels.replay import PARALLEL_MIN_PATHS

        open_ = np.zeros(self.fare.size, dtype=np.int64)
        open_[:-1] = offer
        loop = (replay_fixed_offer_parallel if paths.size >= PARALLEL_MIN_PATHS
                else replay_fixed_offer)
        loop(customer, paths, stop, open_, self.fare, self.legs, book.seats, book.revenue,
             book.accepted, book.lost, book.next_period)


def incidence_lists(network: Network) -> tuple[np.ndarray, np.ndarray]:
    """CSR form of the incidence: product j uses legs ``leg_list[leg_ptr[j]:leg_ptr[j+1]]``."""
    a = np.asarray(network.incidence)
    leg_list = np.ascontiguousarray(np.nonzero(a.T)[1], dtype=np.int64)
    leg_ptr = np.zeros(network.n_products + 1, dtype=np.int64)
    leg_ptr[1:] = np.cumsum(a.sum(axis=0))
    return leg_ptr, leg_list


def kernel_network(network: Network) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``(fares, leg_ptr, leg_list)``, the network as the replay kernel reads it."""
    return (np.ascontiguousarray(network.fares, dtype=np.float64), *incidence_lists(network))


def _groups(book: _Book, pending: np.ndarray) -> list[tuple[int, np.ndarray, np.ndarray]]:
    """Pending paths grouped by (next period, seats left): one solve per distinct state.

    Groups come in lexicographic order of the state and list their paths in ascending order.
    """
    keys = np.column_stack([book.next_period[pending], book.seats[pending]])
    if (keys == keys[0]).all():  # every path at the same state (the first round): no sort
        return [(int(keys[0, 0]), keys[0, 1:], pending)]
    order = np.lexsort(keys.T[::-1])  # integer sorts; much faster than np.unique(axis=0)
    ordered = keys[order]
    starts = np.flatnonzero(np.any(ordered[1:] != ordered[:-1], axis=1)) + 1
    bounds = np.concatenate([[0], starts, [order.size]])
    return [
        (int(ordered[a, 0]), ordered[a, 1:], pending[order[a:b]])
        for a, b in zip(bounds[:-1], bounds[1:], strict=True)
    ]


def replay(
    network: Network,
    demand: DemandModel,
    source: PolicySource,
    arrivals: Arrivals,
    *,
    seed: int,
    resolve: int = 0,
    resolve_every_sale: bool = False,
    trace: bool = False,
    threads: int | None = None,
    progress: Progress | None = None,
) -> Outcome:
    """Run one policy over given customers (the engine behind :func:`simulate`).

    With ``trace`` the outcome records the flat grid state (over the network's full capacities)
    at the start of every period of every path. ``threads`` caps the threads the replay kernel
    spreads paths over (default: numba's, one per core); the numbers do not depend on it.
    ``progress(label, done, total)`` is told the (path, period) pairs replayed so far, about
    ten times a second.
    """
    from rmkit.kernels.replay import loop_for

    n_threads = _threads(threads)

    started = time.perf_counter()
    n_paths, n_periods = arrivals.customer.shape
    control = source.control
    net = kernel_network(network)
    dem = demand.kernel_data()
    wants_resolves = (resolve > 1 and control.adaptive) or (
        resolve_every_sale and control.sale_sensitive)
    if not source.resolvable and control.needs_result and wants_resolves:
        raise InputError(
            f"resolve: policy {source.label!r} is a fixed result and cannot be re-solved; pass "
            "the method (its name or a Solver) to re-solve it, or drop the re-solves"
        )
    resolving = source.resolvable and control.adaptive
    floor = getattr(source, "min_resolves", 0)
    if resolving and floor > resolve:  # a policy defined with its own re-solves (lr-frequent)
        resolve = min(int(floor), n_periods)
    points = resolve_periods(n_periods, resolve) if resolving else np.zeros(1, np.int64)
    every_sale = bool(resolve_every_sale) and resolving and control.sale_sensitive
    book = _Book.start(network, n_paths, demand.n_customer_types)
    fixed = (FixedOfferLoop.start(network) if demand.one_product_per_customer and not trace
             and not every_sale and not control.memory else None)
    # flat states only for a trace: 16 legs of 20 seats already overflow 64-bit indices
    strides = (grid_strides(network.capacities) if trace
               else np.zeros(network.n_legs, dtype=np.int64))
    states = (np.zeros((n_paths, n_periods), dtype=np.int64) if trace
              else np.zeros((0, 0), dtype=np.int64))
    solves, solve_seconds = 0, 0.0
    statuses: dict[str, int] = {}
    # control arrays by state; kept across rounds only with every-sale re-solves, where paths
    # reach the same (period, seats left) in different rounds and small controls repeat
    solved: dict[tuple[int, bytes], Any] = {}
    pending = np.arange(n_paths, dtype=np.int64)
    told = time.perf_counter()
    while pending.size:
        groups = _groups(book, pending)
        todo = [(period, seats) for period, seats, _ in groups
                if (period, seats.tobytes()) not in solved]
        if todo:  # the states of a round are solved together, so a method may share work
            t_solve = time.perf_counter()
            results = _controls_at(source, network, demand, todo,
                                   [solve_seed(seed, period, seats) for period, seats in todo])
            for (period, seats), result in zip(todo, results, strict=True):
                solved[(period, seats.tobytes())] = control.arrays(result, network, seats)
                if result is not None:
                    solves += 1
                    statuses[result.status] = statuses.get(result.status, 0) + 1
            solve_seconds += time.perf_counter() - t_solve
        for period, seats, idx in groups:
            key = (period, seats.tobytes())
            arrays = solved[key] if every_sale else solved.pop(key)
            if control.memory:
                book.room_for_memory(control.memory_width(arrays))
                book.memo[idx] = 0  # the control's memory restarts with each new control
            nxt = np.searchsorted(points, period, side="right")
            stop = int(points[nxt]) if nxt < points.size else n_periods
            offer = control.fixed_offer(arrays, network) if fixed is not None else None
            with _numba_threads(n_threads):
                if offer is not None:
                    fixed.replay(offer, arrivals.customer, idx, stop, book)
                else:
                    loop_for(arrays, dem, idx.size)(
                        arrays, dem, arrivals.customer, arrivals.uniform, idx, stop, every_sale,
                        net, book.arrays(), states, strides)
            if progress is not None and time.perf_counter() - told > 0.1:
                told = time.perf_counter()
                progress(source.label, float(book.next_period.sum()), n_paths * n_periods)
        pending = np.flatnonzero(book.next_period < n_periods)
    summary = _summary(source)
    _warn_inexact(source.label, statuses, solves, summary)
    from rmkit.workflows.policies import assumption

    return Outcome(
        label=source.label,
        control=control.name,
        assumes_independent_demand=assumption(source),
        parameters=dict(source.parameters),
        revenue=book.revenue,
        accepted=book.accepted,
        no_purchase=book.lost,
        seats_left=book.seats,
        solves=solves,
        solve_seconds=solve_seconds,
        seconds=time.perf_counter() - started,
        every_sale=every_sale,
        resolve_periods=[int(p) for p in points],
        statuses=statuses,
        trace=states if trace else None,
        summary=summary,
    )


@contextmanager
def _numba_threads(n: int):
    """numba's thread count for this calling thread, restored afterwards (solves in between
    keep their own)."""
    import numba

    before = numba.get_num_threads()
    if n != before:
        numba.set_num_threads(n)
    try:
        yield
    finally:
        if n != before:
            numba.set_num_threads(before)


def _threads(threads: int | None) -> int:
    import numba

    return numba.get_num_threads() if threads is None else max(1, min(int(threads),
                                                                      numba.get_num_threads()))


def _controls_at(source: PolicySource, network: Network, demand: DemandModel,
                 states: list[tuple[int, np.ndarray]], seeds: list[int]) -> list[Any]:
    """Results at many states: in one call when the source solves in batches."""
    batch = getattr(source, "controls_at", None)
    if batch is not None:
        return list(batch(network, demand, states, seeds))
    return [source.control_at(network, demand, period, seats, s)
            for (period, seats), s in zip(states, seeds, strict=True)]


def _summary(source: PolicySource) -> str:
    fn = getattr(source, "summary", None)
    return fn() if fn is not None else ""


def _warn_inexact(label: str, statuses: dict[str, int], solves: int, summary: str) -> None:
    """One warning per run (never one per re-solve) when some solves were not optimal."""
    inexact = {s: c for s, c in statuses.items() if s != "optimal"}
    if inexact:
        detail = ", ".join(f"{c} {s!r}" for s, c in sorted(inexact.items()))
        warnings.warn(
            f"{label}: {sum(inexact.values())} of {solves} solves were not optimal ({detail}); "
            "their controls were simulated as returned" + (f" ({summary})" if summary else ""),
            RuntimeWarning,
            stacklevel=3,
        )


# ---------------------------------------------------------------- checks
def check_run(
    network: Network, demand: DemandModel, paths: Any, seed: Any, resolve: Any, max_bytes: int
) -> None:
    from rmkit.errors import param_error
    from rmkit.methods.base import non_negative_int, positive_int

    check_compatible(network, demand)
    if not positive_int(paths):
        raise param_error("simulate", "paths", "a whole number >= 1", paths)
    if not non_negative_int(seed) or seed > MAX_SEED:
        raise param_error("simulate", "seed", whole_rule(0, MAX_SEED), seed)
    if not non_negative_int(resolve):
        raise param_error("simulate", "resolve", "a whole number >= 0", resolve)
    if resolve > demand.n_periods:
        raise param_error(
            "simulate", "resolve", f"at most the number of periods ({demand.n_periods})", resolve
        )
    per_path = demand.n_periods * 4 + 8 * (3 * network.n_products + 4 * network.n_legs + 2)
    need = int(paths) * per_path * 2  # streams and books, plus the draw's uniform numbers
    reason = memory_refusal(need, f"{paths:,} paths x {demand.n_periods:,} periods", max_bytes)
    if reason is not None:
        raise ProblemTooLargeError(
            f"paths: {reason}; use at most {max(1, max_bytes // (2 * per_path)):,} paths per run "
            "and combine runs with different seeds"
        )


# ---------------------------------------------------------------- datasets
def path_dataset(outcome: Outcome, network: Network, demand: DemandModel):
    from rmkit import schema

    caps = np.asarray(network.capacities, dtype=np.float64)
    with np.errstate(invalid="ignore", divide="ignore"):
        load = np.where(caps > 0, (caps - outcome.seats_left) / np.where(caps > 0, caps, 1), np.nan)
    summary = summarize(outcome.revenue)
    loaded = caps > 0  # a leg without seats has no load factor (NaN), not a warning
    load_mean = np.full(caps.size, np.nan)
    if load.shape[0]:
        load_mean[loaded] = load[:, loaded].mean(axis=0)
    return schema.dataset(
        {
            "revenue": outcome.revenue,
            "accepted": outcome.accepted,
            "no_purchase": outcome.no_purchase,
            "seats_left": outcome.seats_left,
            "load_factor": load,
            "revenue_mean": summary.mean,
            "revenue_stderr": summary.stderr,
            "revenue_ci_low": summary.ci_low,
            "revenue_ci_high": summary.ci_high,
            "load_factor_mean": load_mean,
        },
        coords={
            "path": np.arange(outcome.revenue.size),
            "product": np.array(network.product_ids, dtype=object),
            "leg": np.array(network.leg_ids, dtype=object),
            "customer": np.array(demand.customer_type_ids(network), dtype=object),
        },
    )


def _run_attrs(outcome: Outcome, seed: int, paths: int, resolve: int, network: Network) -> dict:
    return {
        "policy": outcome.label,
        "control": outcome.control,
        # the approximation of a policy solved through the independent-demand view; "" = none
        "assumes_independent_demand": outcome.assumes_independent_demand,
        "seed": int(seed),
        "paths": int(paths),
        "resolves": int(resolve),
        # what happened, whatever was asked: controls that never re-solve (fcfs, a stored
        # policy, a table) run from their one start
        "resolves_done": len(outcome.resolve_periods) if len(outcome.resolve_periods) > 1 else 0,
        "resolve_periods": json.dumps(outcome.resolve_periods),
        "resolve_every_sale": int(outcome.every_sale),
        "solves": int(outcome.solves),
        "solve_statuses": json.dumps(outcome.statuses, sort_keys=True),
        "resolve_summary": outcome.summary,
        "parameters": json.dumps(outcome.parameters, sort_keys=True, default=str),
        "network": network.name,
        "seconds": float(outcome.seconds),
        "solve_seconds": float(outcome.solve_seconds),
        "confidence": CONFIDENCE,
        "rmkit_version": __version__,
    }


def simulate(
    network: Network,
    demand: DemandModel,
    policy: Any,
    *,
    paths: int,
    seed: int,
    resolve: int = 0,
    resolve_every_sale: bool = False,
    params: Mapping[str, Any] | None = None,
    max_bytes: int = DEFAULT_MAX_BYTES,
    progress: Progress | None = None,
):
    """Simulate one booking policy on ``paths`` request streams drawn with ``seed``.

    Parameters
    ----------
    network, demand
        The problem.
    policy
        A method name (``"fcfs"`` or any registered method with a control), a
        :class:`~rmkit.methods.base.Solver`, a :class:`~rmkit.results.SolveResult` solved from period 0
        (applied as is: asking to re-solve it is an error) or a :mod:`rmkit.workflows.policies` source.
    paths, seed
        Number of sample paths and the seed of their request streams.
    resolve
        Number of equally spaced recomputations (0 or 1: solve once at the start).
    resolve_every_sale
        Also recompute ``bid_price`` and ``nested`` controls after every sale of a path.
    params
        Settings of the method when ``policy`` is a name.
    progress
        ``progress(label, done, total)`` callback (:mod:`rmkit.workflows.progress`).

    Returns
    -------
    xarray.Dataset
        ``revenue`` (path), ``accepted`` (path, product), ``no_purchase`` (path, customer: customers
        who bought nothing, by type), ``seats_left`` and
        ``load_factor`` (path, leg), the summary ``revenue_mean``, ``revenue_stderr``,
        ``revenue_ci_low``, ``revenue_ci_high`` and ``load_factor_mean`` (leg); attrs record the
        policy, seed, paths, resolves asked for (``resolves``) and done (``resolves_done``: 0 for
        a control that never re-solves), number of solves, parameters (JSON), the seconds spent
        compiling kernels (``compile_seconds``, not in ``seconds``), the warnings raised (JSON
        ``{message: count}``; each distinct one is re-issued once) and the rmkit version.
    """
    from rmkit.workflows.compiling import CompileWatch
    from rmkit.workflows.warnings_log import as_attr, recorded

    check_run(network, demand, paths, seed, resolve, max_bytes)
    source = make_policy(policy, dict(params or {}))
    arrivals = demand.sample_arrivals(int(paths), int(seed))
    with recorded() as messages, CompileWatch() as compiling:
        outcome = replay(network, demand, source, arrivals, seed=int(seed), resolve=int(resolve),
                         resolve_every_sale=resolve_every_sale, progress=progress)
    outcome.seconds -= compiling.seconds
    outcome.solve_seconds = max(outcome.solve_seconds - compiling.seconds, 0.0)
    for text in dict.fromkeys(messages):  # once each: the count is in the attrs
        warnings.warn(text, RuntimeWarning, stacklevel=2)
    ds = path_dataset(outcome, network, demand)
    ds.attrs.update(_run_attrs(outcome, seed, paths, resolve, network))
    ds.attrs.update({"compile_seconds": float(compiling.seconds), "warnings": as_attr(messages)})
    return ds


# ---------------------------------------------------------------- comparison
