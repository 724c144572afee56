"""numba kernels that turn uniform numbers into sampled customers (no RNG inside, no validation)."""

from __future__ import annotations

import numpy as np
from numba import njit

#: The largest float64 below 1: a purchase number is kept in [0, 1) despite rounding.
_BELOW_ONE = np.nextafter(1.0, 0.0)


@njit(cache=True)
def draw_arrivals(u: np.ndarray, cum: np.ndarray, customer: np.ndarray, uniform: np.ndarray
                  ) -> None:
    """customer[k, t] = first type l with u[k, t] < cum[t, l], or -1 past the row's total.

    When ``uniform`` is ``(paths, T)`` it receives the purchase number, u's position within the
    chosen type's interval ``[cum[t, l-1], cum[t, l])`` rescaled to [0, 1) (0 where no one
    arrives); a ``(0, 0)`` array skips it.
    """
    n_paths, n_periods = u.shape
    n = cum.shape[1]
    want = uniform.size > 0
    for k in range(n_paths):
        for t in range(n_periods):
            x = u[k, t]
            if n == 0 or x >= cum[t, n - 1]:
                customer[k, t] = -1
                if want:
                    uniform[k, t] = 0.0
                continue
            lo = 0
            hi = n - 1
            while lo < hi:  # binary search for the first cum[t, l] > x
                mid = (lo + hi) // 2
                if cum[t, mid] > x:
                    hi = mid
                else:
                    lo = mid + 1
            customer[k, t] = lo
            if want:
                start = cum[t, lo - 1] if lo > 0 else 0.0
                r = (x - start) / (cum[t, lo] - start)
                uniform[k, t] = min(max(r, 0.0), _BELOW_ONE)


@njit(cache=True)
def count_requests(streams: np.ndarray, out: np.ndarray) -> None:
    """out[k, j] += number of periods in which path k requests product j."""
    n_paths, n_periods = streams.shape
    for k in range(n_paths):
        for t in range(n_periods):
            j = streams[k, t]
            if j >= 0:
                out[k, j] += 1
