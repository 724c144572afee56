"""numba kernels of the single-leg dynamic program (Lee & Hersh 1993); no validation, no labels.

The recursion (Talluri & van Ryzin 2004, section 2.5.1), for a leg of capacity C over periods
``t = 0 .. T-1`` with request probabilities ``p[t, j]`` and fares ``f[t, j]``::

    V_T(x) = 0,   V_t(0) = 0,
    V_t(x) = V_{t+1}(x) + sum_j p[t, j] * max(0, f[t, j] - (V_{t+1}(x) - V_{t+1}(x - 1)))

A fare ``<= 0`` is never accepted (its term is skipped). The terms are added in product order,
starting from ``V_{t+1}(x)``, with no fused multiply-add, so the network kernels in
``rmkit.kernels.network_dp`` reproduce these numbers bit for bit on a one-leg network.

Loop order: products outside, seats inside, so the inner loop runs along one contiguous row of
``value_out`` with no branch and the compiler vectorises it.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange


@njit(cache=True, nogil=True)
def _leg_values_into(prob: np.ndarray, fare: np.ndarray, capacity: int, products: np.ndarray,
                     value: np.ndarray) -> None:
    """Fill ``value[:, :capacity+1]`` (T+1 rows) for one leg; columns past capacity untouched.

    Only the products listed in ``products`` (ascending, padded at the end with -1) are read:
    the others must have fare ``<= 0`` on this leg (never accepted)."""
    n_periods = prob.shape[0]
    n_listed = 0
    while n_listed < products.size and products[n_listed] >= 0:
        n_listed += 1
    for x in range(capacity + 1):
        value[n_periods, x] = 0.0
    for t in range(n_periods - 1, -1, -1):
        nxt = value[t + 1]
        cur = value[t]
        cur[0] = 0.0
        for x in range(1, capacity + 1):
            cur[x] = nxt[x]
        for q in range(n_listed):
            j = products[q]
            f = fare[t, j]
            p = prob[t, j]
            if f <= 0.0 or p == 0.0:
                continue
            for x in range(1, capacity + 1):
                cur[x] += p * max(f - (nxt[x] - nxt[x - 1]), 0.0)


@njit(cache=True)
def single_leg_values(
    prob: np.ndarray, fare: np.ndarray, capacity: int, value_out: np.ndarray
) -> None:
    """Value to go of one leg: ``value_out[t, x]`` = V_t(x) for ``t = 0..T``, ``x = 0..capacity``.

    ``prob`` and ``fare`` are ``(T, n)``; ``value_out`` is a preallocated ``(T+1, capacity+1)``
    float64 array, overwritten.
    """
    _leg_values_into(prob, fare, capacity, np.arange(prob.shape[1]), value_out)


@njit(cache=True, parallel=True)
def leg_values_batch(
    prob: np.ndarray, fares: np.ndarray, capacities: np.ndarray, value_out: np.ndarray
) -> None:
    """Value to go of L legs at once, in parallel over legs.

    ``prob`` is ``(T, n)`` (shared by every leg), ``fares`` ``(L, T, n)`` (per leg and period;
    ``<= 0`` means the product is never accepted on that leg), ``capacities`` ``(L,)`` int,
    ``value_out`` ``(L, T+1, cmax+1)`` float64 with ``cmax >= max(capacities)``. Entries above a
    leg's capacity are set to NaN.
    """
    every = np.arange(prob.shape[1])
    for leg in prange(fares.shape[0]):
        _leg_values_padded(prob, fares[leg], capacities[leg], every, value_out[leg])


@njit(cache=True, nogil=True)
def leg_values_each(
    prob: np.ndarray, fares: np.ndarray, capacities: np.ndarray, leg_products: np.ndarray,
    value_out: np.ndarray,
) -> None:
    """:func:`leg_values_batch` leg after leg on the calling thread, without the GIL, reading
    only the products of each leg: for callers that run many small problems side by side in
    threads of their own (the Lagrangian re-solves of a simulation), where waking a thread pool
    per call costs more than a leg.

    ``leg_products`` ``(L, K)``: row i lists the products that may have a fare ``> 0`` on leg i
    (ascending, padded with -1); the numbers equal :func:`leg_values_batch`'s when every other
    product's fare on the leg is ``<= 0``."""
    for leg in range(fares.shape[0]):
        _leg_values_padded(prob, fares[leg], capacities[leg], leg_products[leg], value_out[leg])


@njit(cache=True, nogil=True)
def _leg_values_padded(prob: np.ndarray, fare: np.ndarray, capacity: int, products: np.ndarray,
                       value: np.ndarray) -> None:
    """One leg's values, with NaN in the columns above its capacity."""
    _leg_values_into(prob, fare, capacity, products, value)
    for t in range(value.shape[0]):
        for x in range(capacity + 1, value.shape[1]):
            value[t, x] = np.nan


@njit(cache=True)
def gather_leg_tables(values: np.ndarray, legs: np.ndarray, table_out: np.ndarray,
                      value_out: np.ndarray) -> None:
    """One state's ``(T, cmax+1, L)`` tables from leg values shared between states.

    ``values`` ``(U, T+1, cmax+1)`` holds solved legs; the state's leg l is ``values[legs[l]]``.
    ``table_out[t, x, l] = V(t+1, x) - V(t+1, x-1)`` with ``+inf`` at x = 0 (the bid-price
    table of :func:`rmkit.methods.shared.leg_dp.leg_tables`, the same subtractions);
    ``value_out[t, x, l] = V(t, x)``, skipped when ``value_out`` is empty. Written straight into
    the state's arrays, with no ``(U, T, cmax+1)`` table of every solved leg in between.
    """
    n_periods, width, n_legs = table_out.shape
    keep_values = value_out.size > 0
    for t in range(n_periods):
        for x in range(width):
            for leg in range(n_legs):
                u = legs[leg]
                table_out[t, x, leg] = (np.inf if x == 0
                                        else values[u, t + 1, x] - values[u, t + 1, x - 1])
                if keep_values:
                    value_out[t, x, leg] = values[u, t, x]
