"""numba kernel of the policy simulator: customers meet a booking control, path by path.

The loop is split in two questions, each answered by a small function that its own module
registers for its own array type (numba ``overload``), so that a new booking control or a new
demand kind plugs in without an edit here:

``control_offers(ctrl, k, t, j, seats, memo, net)``
    Does the control offer product j on path k in period t? Registered by each booking control
    (:mod:`rmkit.controls`) for its arrays type. Seats are checked before it is asked
    (:func:`offered`): a product whose legs lack a seat is never offered.
``customer_chooses(dem, ctrl, k, t, c, u, seats, memo, net)``
    What does an arriving customer of type c with purchase number u buy (a product index or -1)?
    Registered by each demand kind (:mod:`rmkit.model`) for its kernel-data type; it asks
    :func:`offered` about the products it considers, so every policy faces the same customers.

``control_records_sale(ctrl, k, j, memo, net)`` lets a control keep per-path memory (nested
limits count sales by bucket); controls that need none register nothing for it.

``replay_paths`` is compiled once per (control, demand kind) pair of array types and cached
(:func:`loop_for` picks an uncached twin for types defined outside rmkit). Arrays
and scalars in, preallocated outputs updated in place, no RNG (customers are drawn beforehand),
no validation (the Python side checks shapes). Called from Python code (tests, ``.py_func``),
the three functions dispatch on the argument's type to the registered Python implementations.

Net arrays: ``net = (fares, leg_ptr, leg_list)``; product j uses legs
``leg_list[leg_ptr[j]:leg_ptr[j+1]]``. Book arrays: ``book = (seats, revenue, accepted, lost,
memo, next_period)``; ``lost[k, c]`` counts customers of type c who bought nothing.
"""

from __future__ import annotations

from collections.abc import Callable

from numba import njit, prange, types
from numba.extending import overload

#: Relative slack of the bid-price test ``f_j >= sum of bid prices`` (rounding of solver output):
#: LP duals of a product the LP takes partially sum to its fare exactly in exact arithmetic but
#: may come back one ulp above it, and the rule must still accept that product.
ACCEPT_TOLERANCE = 1e-9

_OFFERS: dict[type, Callable] = {}
_ON_SALE: dict[type, Callable] = {}
_CHOOSE: dict[type, Callable] = {}


# ---------------------------------------------------------------- the extension points
def control_offers(ctrl, k, t, j, seats, memo, net):
    """Whether the control ``ctrl`` offers product j (seats already checked); see the module doc."""
    return _OFFERS[type(ctrl)](ctrl, k, t, j, seats, memo, net)


def control_records_sale(ctrl, k, j, memo, net):
    """Update the control's per-path memory after a sale of product j on path k."""
    impl = _ON_SALE.get(type(ctrl))
    if impl is not None:
        impl(ctrl, k, j, memo, net)


def customer_chooses(dem, ctrl, k, t, c, u, seats, memo, net):
    """The product a customer of type c buys on path k in period t, or -1."""
    return _CHOOSE[type(dem)](dem, ctrl, k, t, c, u, seats, memo, net)


def _is_named(ty, cls: type) -> bool:
    return isinstance(ty, types.BaseNamedTuple) and ty.instance_class is cls


def _no_memory(ctrl, k, j, memo, net):
    return None


def register_control_kernel(arrays_type: type, offers: Callable, on_sale: Callable | None = None
                            ) -> None:
    """Make ``offers`` (and ``on_sale``) the kernel functions of controls whose arrays are a
    ``NamedTuple`` of class ``arrays_type``. Both are plain Python functions numba can compile."""
    _OFFERS[arrays_type] = offers
    if on_sale is not None:
        _ON_SALE[arrays_type] = on_sale

    @overload(control_offers, inline="always")
    def _offers(ctrl, k, t, j, seats, memo, net):
        if _is_named(ctrl, arrays_type):
            return offers

    @overload(control_records_sale, inline="always")
    def _records(ctrl, k, j, memo, net):
        if _is_named(ctrl, arrays_type):
            return on_sale if on_sale is not None else _no_memory


def register_demand_kernel(data_type: type, choose: Callable) -> None:
    """Make ``choose`` the kernel function of demand kinds whose kernel data is a ``NamedTuple``
    of class ``data_type``."""
    _CHOOSE[data_type] = choose

    @overload(customer_chooses, inline="always")
    def _choose(dem, ctrl, k, t, c, u, seats, memo, net):
        if _is_named(dem, data_type):
            return choose


# ---------------------------------------------------------------- shared pieces
@njit(cache=True, inline="always")
def seats_free(seats, k, leg_list, lo, hi):
    """True when path k has a seat left on every leg ``leg_list[lo:hi]``."""
    for q in range(lo, hi):
        if seats[k, leg_list[q]] < 1:
            return False
    return True


@njit(cache=True, inline="always")
def clears_bid_prices(fare, bid_sum):
    """The bid-price rule ``fare >= bid_sum``, with rounding slack."""
    return fare >= bid_sum - ACCEPT_TOLERANCE * fare


@njit(cache=True, inline="always")
def offered(ctrl, k, t, j, seats, memo, net):
    """Product j is on offer: a seat on each of its legs, and the control opens it."""
    leg_ptr = net[1]
    if not seats_free(seats, k, net[2], leg_ptr[j], leg_ptr[j + 1]):
        return False
    return control_offers(ctrl, k, t, j, seats, memo, net)


@njit(cache=True, inline="always")
def sell(k, j, seats, revenue, accepted, net):
    """Book one unit of product j on path k: seats, revenue and the sales count."""
    fares, leg_ptr, leg_list = net
    for q in range(leg_ptr[j], leg_ptr[j + 1]):
        seats[k, leg_list[q]] -= 1
    revenue[k] += fares[j]
    accepted[k, j] += 1


@njit(cache=True, inline="always")
def flat_state(seats, k, strides):
    s = 0
    for i in range(strides.size):
        s += seats[k, i] * strides[i]
    return s


# ---------------------------------------------------------------- the loop
# The per-path body is written out in both loops below rather than called: numba (0.68)
# miscompiled a per-path function holding the inlined extension points (the final write of
# next_period was lost), while the same body inside the loop compiles correctly. The two loops
# are tested against each other and against their own py_func.
@njit(cache=True)
def replay_paths(ctrl, dem, customer, uniform, paths, stop, stop_after_sale, net, book, trace,
                 strides):
    """Replay periods ``next_period[k] .. stop-1`` of every path k in ``paths`` under ``ctrl``.

    Updates the book arrays in place. With ``stop_after_sale`` a path halts right after its first
    sale (``next_period`` is then the period after it), so the caller can recompute the control
    from the new state. When ``trace`` is ``(paths, T)`` (not ``(0, 0)``), ``trace[k, t]``
    receives the flat state ``sum_i seats_i * strides_i`` at the start of period t.
    """
    seats, revenue, accepted, lost, memo, next_period = book
    tracing = trace.size > 0
    choosing = uniform.size > 0
    for q in range(paths.size):
        k = paths[q]
        t = next_period[k]
        while t < stop:
            if tracing:
                trace[k, t] = flat_state(seats, k, strides)
            c = customer[k, t]
            u = uniform[k, t] if choosing else 0.0
            t += 1
            if c < 0:
                continue
            j = customer_chooses(dem, ctrl, k, t - 1, c, u, seats, memo, net)
            if j >= 0:
                sell(k, j, seats, revenue, accepted, net)
                control_records_sale(ctrl, k, j, memo, net)
                if stop_after_sale:
                    break
            else:
                lost[k, c] += 1
        next_period[k] = t


@njit(cache=True, parallel=True)
def replay_paths_parallel(ctrl, dem, customer, uniform, paths, stop, stop_after_sale, net, book,
                          trace, strides):
    """:func:`replay_paths` with the paths split over numba's threads. Each path reads and
    writes only its own rows, so the numbers equal the one-thread loop's exactly."""
    seats, revenue, accepted, lost, memo, next_period = book
    tracing = trace.size > 0
    choosing = uniform.size > 0
    for q in prange(paths.size):
        k = paths[q]
        t = next_period[k]
        while t < stop:
            if tracing:
                trace[k, t] = flat_state(seats, k, strides)
            c = customer[k, t]
            u = uniform[k, t] if choosing else 0.0
            t += 1
            if c < 0:
                continue
            j = customer_chooses(dem, ctrl, k, t - 1, c, u, seats, memo, net)
            if j >= 0:
                sell(k, j, seats, revenue, accepted, net)
                control_records_sale(ctrl, k, j, memo, net)
                if stop_after_sale:
                    break
            else:
                lost[k, c] += 1
        next_period[k] = t


#: The same loops without an on-disk cache, for controls or demand kinds defined outside rmkit:
#: a cached specialization for a type from another module would make the cache index unreadable
#: in every process that cannot import that module.
replay_paths_uncached = njit(cache=False)(replay_paths.py_func)
replay_paths_parallel_uncached = njit(cache=False, parallel=True)(replay_paths_parallel.py_func)
#: Fewest paths worth waking the thread pool for.
PARALLEL_MIN_PATHS = 256


def loop_for(ctrl, dem, n_paths: int = 0):
    """The replay loop for these array types: cached when both types are rmkit's own, the
    threaded loop when there are enough paths (the caller sets how many threads it may use).

    The threaded loop is chosen even for one thread: numba compiles its outlined body to faster
    code for controls that index arrays by state or keep memory. Measured in one process on one
    thread (benchmarks/bench_simulate.py shapes): nested limits 6.8 -> 31.7 M requests/s,
    stored decisions 12.5 -> 33.0 M, static bid prices 49.2 -> 45.1 M; the numbers are the
    same (both loops are tested against their py_func)."""
    own = all(type(a).__module__.startswith("rmkit.") for a in (ctrl, dem))
    if n_paths >= PARALLEL_MIN_PATHS:
        return replay_paths_parallel if own else replay_paths_parallel_uncached
    return replay_paths if own else replay_paths_uncached
