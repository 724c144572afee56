"""numba kernel of the simulator for a fixed offer: each customer asks for one product, and the
control offers a fixed set of products whenever each of their legs has a seat.

Static bid prices and first come, first served are such controls between two re-solves, under
independent demand. :func:`rmkit.kernels.replay.replay_paths` answers every request through the
extension points, and its branches on "a customer came", "seats on every leg" and "the control
opens it" go either way at random, so the processor mispredicts about two of them per request.
Here the answer is arithmetic instead: the "no customer" slot reads as an extra product that is
never open, every product's legs are padded to one width with a spare leg that never runs out,
and a sale adds ``ok * fare`` and subtracts ``ok`` from each leg. The numbers are those of the
general loop, exactly (adding ``0.0 * fare`` leaves a sum unchanged); tests compare the two.

``open_`` (n+1,) int64: 1 where product j is offered (0 at index n, "no customer");
``fare`` (n+1,) float64 with 0 at n; ``legs`` (n+1, width) int64: product j's legs, padded with
the spare leg m (every column of row n is m). Book arrays as in :mod:`rmkit.kernels.replay`.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange


@njit(cache=True, inline="always")
def replay_one(k, x, sold, asked, customer, stop, open_, fare, legs, seats, revenue, accepted,
               lost, next_period):
    """Path k from ``next_period[k]`` to ``stop``; ``x`` (m+1,), ``sold`` and ``asked`` (n+1,)
    are scratch, reset here."""
    n = fare.size - 1
    m = seats.shape[1]
    width = legs.shape[1]
    for i in range(m):
        x[i] = seats[k, i]
    x[m] = (stop + 1) * width  # the spare leg: a sale takes at most width of its seats
    sold[:] = 0
    asked[:] = 0
    r = revenue[k]
    for t in range(next_period[k], stop):
        c = customer[k, t]
        c = c if c >= 0 else n
        ok = open_[c]
        for w in range(width):
            ok &= x[legs[c, w]] > 0
        for w in range(width):
            x[legs[c, w]] -= ok
        r += fare[c] * ok
        sold[c] += ok
        asked[c] += 1
    revenue[k] = r
    for i in range(m):
        seats[k, i] = x[i]
    for j in range(n):
        accepted[k, j] += sold[j]
        lost[k, j] += asked[j] - sold[j]
    if stop > next_period[k]:
        next_period[k] = stop


@njit(cache=True)
def replay_fixed_offer(customer, paths, stop, open_, fare, legs, seats, revenue, accepted, lost,
                       next_period):
    """Replay periods ``next_period[k] .. stop-1`` of every path k in ``paths``."""
    x = np.empty(seats.shape[1] + 1, dtype=np.int64)
    sold = np.empty(fare.size, dtype=np.int64)
    asked = np.empty(fare.size, dtype=np.int64)
    for q in range(paths.size):
        replay_one(paths[q], x, sold, asked, customer, stop, open_, fare, legs, seats, revenue,
                   accepted, lost, next_period)


#: Paths per piece of the threaded loop (each piece allocates its scratch once).
PIECE = 256


@njit(cache=True, parallel=True)
def replay_fixed_offer_parallel(customer, paths, stop, open_, fare, legs, seats, revenue,
                                accepted, lost, next_period):
    """:func:`replay_fixed_offer` with pieces of the paths split over numba's threads; each path
    reads and writes only its own rows, so the numbers are the same."""
    n_pieces = (paths.size + PIECE - 1) // PIECE
    for p in prange(n_pieces):
        x = np.empty(seats.shape[1] + 1, dtype=np.int64)
        sold = np.empty(fare.size, dtype=np.int64)
        asked = np.empty(fare.size, dtype=np.int64)
        for q in range(p * PIECE, min((p + 1) * PIECE, paths.size)):
            replay_one(paths[q], x, sold, asked, customer, stop, open_, fare, legs, seats,
                       revenue, accepted, lost, next_period)

