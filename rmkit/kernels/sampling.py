"""numba kernels that turn uniform numbers into request streams (no RNG inside, no validation)."""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True)
def draw_requests(u: np.ndarray, cum: np.ndarray, out: np.ndarray) -> None:
    """out[k, t] = first j with u[k, t] < cum[t, j], or -1 when u is past the row's total."""
    n_paths, n_periods = u.shape
    n = cum.shape[1]
    for k in range(n_paths):
        for t in range(n_periods):
            x = u[k, t]
            if x >= cum[t, n - 1]:
                out[k, t] = -1
                continue
            lo = 0
            hi = n - 1
            while lo < hi:  # binary search for the first cum[t, j] > x
                mid = (lo + hi) // 2
                if cum[t, mid] > x:
                    hi = mid
                else:
                    lo = mid + 1
            out[k, t] = lo


@njit(cache=True)
def count_requests(streams: np.ndarray, out: np.ndarray) -> None:
    """out[k, j] += number of periods in which path k requests product j."""
    n_paths, n_periods = streams.shape
    for k in range(n_paths):
        for t in range(n_periods):
            j = streams[k, t]
            if j >= 0:
                out[k, j] += 1
