"""numba kernel behind :mod:`rmkit.workflows.compare`: the states the optimal policy visits.

Replays request streams under the exact DP's stored decisions (bit ``j % 8`` of
``bits[t, s, j // 8]``, flat state ``s = sum_i x_i stride_i``) and records the flat state at the
start of every period of every path. Arrays in, preallocated output, no RNG (the streams are
drawn beforehand), no validation; the accept rule is the simulator's own
(:mod:`rmkit.kernels.replay`), so the trajectories are exactly those the simulator replays.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from rmkit.kernels.replay import exact_accepts, seats_free


@njit(cache=True)
def exact_trajectories(
    streams: np.ndarray,
    bits: np.ndarray,
    strides: np.ndarray,
    leg_ptr: np.ndarray,
    leg_list: np.ndarray,
    seats: np.ndarray,
    out: np.ndarray,
) -> None:
    """``out[k, t]`` = flat state at the start of period t on path k (``seats`` is updated).

    ``seats`` is ``(paths, legs)``, holding the starting seats of every path.
    """
    n_paths, n_periods = streams.shape
    for k in range(n_paths):
        for t in range(n_periods):
            s = 0
            for i in range(strides.size):
                s += seats[k, i] * strides[i]
            out[k, t] = s
            j = streams[k, t]
            if j < 0:
                continue
            lo = leg_ptr[j]
            hi = leg_ptr[j + 1]
            if seats_free(seats, k, leg_list, lo, hi) and exact_accepts(bits, t, strides, seats,
                                                                        k, j):
                for q in range(lo, hi):
                    seats[k, leg_list[q]] -= 1
