"""numba kernels of the policy simulator: replay request streams under a booking control.

One loop over (paths x periods) serves every control; a small decision function per control says
whether one request is accepted. Arrays and scalars in, preallocated outputs updated in place, no
RNG (the request streams are drawn beforehand), no validation (the caller checks shapes).

Controls (integer codes, see ``CONTROL_CODES``)
-----------------------------------------------
Product j uses legs ``leg_list[leg_ptr[j]:leg_ptr[j+1]]``; a request is refused outright when one
of them has no seat left. Otherwise:

* first come, first served: accept.
* static bid price ``pi``: accept iff ``f_j >= sum_{i in j} pi_i``.
* bid-price table ``B[t - t0, x_i, i]``: accept iff ``f_j >= sum_{i in j} B[t - t0, x_i, i]``.
* nested limits: on every leg i of j, with bucket ``b = bucket[i, j]`` (-1 = closed), accept iff
  ``sum_{b' >= b} sold[i, b'] + 1 <= limit[i, b]`` (sales since the limits were set).
* exact decisions: bit ``j % 8`` of ``bits[t - t0, s, j // 8]`` with ``s = sum_i x_i stride_i``.

The bid-price comparisons allow ``ACCEPT_TOLERANCE * f_j`` of rounding: LP duals of a product the
LP takes partially sum to its fare exactly in exact arithmetic but may come back one ulp above it,
and the rule ``f_j >= sum`` must still accept that product.
"""

from __future__ import annotations

from numba import njit

FCFS = 0
BID_PRICE = 1
TABLE = 2
NESTED = 3
EXACT = 4

#: Control name (as in ``Tags.control``) -> kernel code.
CONTROL_CODES = {"fcfs": FCFS, "bid_price": BID_PRICE, "table": TABLE, "nested": NESTED,
                 "exact": EXACT}

#: Relative slack of the bid-price test ``f_j >= sum of bid prices`` (rounding of solver output).
ACCEPT_TOLERANCE = 1e-9


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
def static_bid_sum(bid, leg_list, lo, hi):
    s = 0.0
    for q in range(lo, hi):
        s += bid[leg_list[q]]
    return s


@njit(cache=True, inline="always")
def table_bid_sum(table, row, seats, k, leg_list, lo, hi):
    s = 0.0
    for q in range(lo, hi):
        i = leg_list[q]
        s += table[row, seats[k, i], i]
    return s


@njit(cache=True, inline="always")
def nested_open(limit, bucket, sold, k, j, leg_list, lo, hi):
    """True when bucket ``bucket[i, j]`` still has room on every leg i of product j."""
    n_buckets = limit.shape[1]
    for q in range(lo, hi):
        i = leg_list[q]
        b = bucket[i, j]
        if b < 0:
            return False
        taken = 0
        for bb in range(b, n_buckets):
            taken += sold[k, i, bb]
        if taken + 1 > limit[i, b]:
            return False
    return True


@njit(cache=True, inline="always")
def exact_accepts(bits, row, strides, seats, k, j):
    s = 0
    for i in range(strides.size):
        s += seats[k, i] * strides[i]
    return (bits[row, s, j >> 3] >> (j & 7)) & 1 == 1


@njit(cache=True, inline="always")
def accepts(code, k, t, j, fares, leg_ptr, leg_list, seats, sold, t0, bid, table, limit, bucket,
            bits, strides):
    """Whether path k accepts a request for product j in period t (seats checked first)."""
    lo = leg_ptr[j]
    hi = leg_ptr[j + 1]
    if not seats_free(seats, k, leg_list, lo, hi):
        return False
    if code == BID_PRICE:
        return clears_bid_prices(fares[j], static_bid_sum(bid, leg_list, lo, hi))
    if code == TABLE:
        return clears_bid_prices(fares[j], table_bid_sum(table, t - t0, seats, k, leg_list, lo, hi))
    if code == NESTED:
        return nested_open(limit, bucket, sold, k, j, leg_list, lo, hi)
    if code == EXACT:
        return exact_accepts(bits, t - t0, strides, seats, k, j)
    return True


@njit(cache=True, inline="always")
def sell(k, j, fares, leg_ptr, leg_list, bucket, seats, revenue, accepted, sold, track_buckets):
    """Book one unit of product j on path k: seats, revenue, counts (and bucket sales)."""
    for q in range(leg_ptr[j], leg_ptr[j + 1]):
        i = leg_list[q]
        seats[k, i] -= 1
        if track_buckets:
            sold[k, i, bucket[i, j]] += 1
    revenue[k] += fares[j]
    accepted[k, j] += 1


@njit(cache=True, inline="always")
def replay_loop(code, streams, paths, stop, stop_after_sale, net, ctrl, book):
    """The request loop of :func:`run_requests` for one control ``code``.

    Inlined with ``code`` a constant, so the compiler drops the other controls' branches (a
    run-time code made the loop about 7x slower).
    """
    fares, leg_ptr, leg_list = net
    t0, bid, table, limit, bucket, bits, strides = ctrl
    seats, revenue, accepted, rejected, sold, next_period = book
    track = code == NESTED
    for q in range(paths.size):
        k = paths[q]
        t = next_period[k]
        while t < stop:
            j = streams[k, t]
            t += 1
            if j < 0:
                continue
            if accepts(code, k, t - 1, j, fares, leg_ptr, leg_list, seats, sold, t0, bid, table,
                       limit, bucket, bits, strides):
                sell(k, j, fares, leg_ptr, leg_list, bucket, seats, revenue, accepted, sold, track)
                if stop_after_sale:
                    break
            else:
                rejected[k, j] += 1
        next_period[k] = t


@njit(cache=True)
def run_requests(streams, paths, stop, stop_after_sale, code, fares, leg_ptr, leg_list, t0, bid,
                 table, limit, bucket, bits, strides, seats, revenue, accepted, rejected, sold,
                 next_period):
    """Replay periods ``next_period[k] .. stop-1`` of every path k in ``paths`` under one control.

    Updates ``seats``, ``revenue``, ``accepted``, ``rejected``, ``sold`` and ``next_period`` in
    place. With ``stop_after_sale`` a path halts right after its first sale (``next_period`` is
    then the period after it), so the caller can recompute the control from the new state.
    """
    net = (fares, leg_ptr, leg_list)
    ctrl = (t0, bid, table, limit, bucket, bits, strides)
    book = (seats, revenue, accepted, rejected, sold, next_period)
    if code == BID_PRICE:
        replay_loop(BID_PRICE, streams, paths, stop, stop_after_sale, net, ctrl, book)
    elif code == TABLE:
        replay_loop(TABLE, streams, paths, stop, stop_after_sale, net, ctrl, book)
    elif code == NESTED:
        replay_loop(NESTED, streams, paths, stop, stop_after_sale, net, ctrl, book)
    elif code == EXACT:
        replay_loop(EXACT, streams, paths, stop, stop_after_sale, net, ctrl, book)
    else:
        replay_loop(FCFS, streams, paths, stop, stop_after_sale, net, ctrl, book)
