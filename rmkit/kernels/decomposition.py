"""numba kernels of the decomposition methods (DP decomposition, Lagrangian relaxation).

The leg value functions themselves come from :mod:`rmkit.kernels.single_leg`; this module adds
the forward pass that follows each leg's optimal policy from a starting seat count and returns
the expected number of acceptances of every product in every period (the subgradient of a leg's
value with respect to its fares), and the projection of the Lagrange multipliers onto the set
``{lambda >= 0, sum over a product's legs = fare}``.

Decision rule, the same as the single-leg kernels: a request for product j in period t with x
seats left is accepted iff ``fare > 0`` and ``fare >= V_{t+1}(x) - V_{t+1}(x - 1)``.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange


@njit(cache=True, nogil=True)
def _leg_acceptance_into(
    prob: np.ndarray,
    fare: np.ndarray,
    capacity: int,
    start: int,
    products: np.ndarray,
    value: np.ndarray,
    occupancy: np.ndarray,
    accept: np.ndarray,
) -> None:
    """One leg: ``occupancy[t, x]`` = P(x seats left at the start of t), ``accept[t, j]``.

    Only the products in ``products`` (ascending, padded at the end with -1) are read and their
    ``accept`` entries written; the others must have fare ``<= 0`` on this leg, and their
    entries are left as they are (the caller keeps them at 0)."""
    n_periods = prob.shape[0]
    n_listed = 0
    while n_listed < products.size and products[n_listed] >= 0:
        n_listed += 1
    width = occupancy.shape[1]
    for t in range(n_periods + 1):
        for x in range(width):
            occupancy[t, x] = 0.0
    occupancy[0, start] = 1.0
    for t in range(n_periods):
        cur = occupancy[t]
        nxt = occupancy[t + 1]
        val = value[t + 1]
        for x in range(capacity + 1):
            nxt[x] = cur[x]
        for q in range(n_listed):
            j = products[q]
            f = fare[t, j]
            p = prob[t, j]
            accept[t, j] = 0.0
            if f <= 0.0 or p == 0.0:
                continue
            total = 0.0
            for x in range(1, capacity + 1):
                if f >= val[x] - val[x - 1]:
                    moved = p * cur[x]
                    total += moved
                    nxt[x] -= moved
                    nxt[x - 1] += moved
            accept[t, j] = total


@njit(cache=True, parallel=True)
def leg_acceptance_batch(
    prob: np.ndarray,
    fares: np.ndarray,
    capacities: np.ndarray,
    start: np.ndarray,
    value: np.ndarray,
    occupancy_out: np.ndarray,
    accept_out: np.ndarray,
) -> None:
    """Follow every leg's optimal policy forward from ``start`` seats, in parallel over legs.

    ``prob`` ``(T, n)``; ``fares`` ``(L, T, n)``; ``capacities`` and ``start`` ``(L,)`` int;
    ``value`` ``(L, T+1, W)`` leg values from ``leg_values_batch`` with the same fares.
    Writes ``occupancy_out`` ``(L, T+1, W)``: the probability of each seat count at the start of
    each period, and ``accept_out`` ``(L, T, n)``: the probability that leg i sells product j in
    period t (request probability times acceptance probability).
    """
    every = np.arange(prob.shape[1])
    for leg in prange(fares.shape[0]):
        _leg_acceptance_into(
            prob, fares[leg], capacities[leg], start[leg], every, value[leg], occupancy_out[leg],
            accept_out[leg],
        )


@njit(cache=True, nogil=True)
def leg_acceptance_each(
    prob: np.ndarray,
    fares: np.ndarray,
    capacities: np.ndarray,
    start: np.ndarray,
    leg_products: np.ndarray,
    value: np.ndarray,
    occupancy_out: np.ndarray,
    accept_out: np.ndarray,
) -> None:
    """:func:`leg_acceptance_batch` leg after leg on the calling thread, without the GIL, reading
    only each leg's products (``leg_products``, as in
    :func:`rmkit.kernels.single_leg.leg_values_each`). ``accept_out`` entries of products off a
    leg are not written: start from zeros to get :func:`leg_acceptance_batch`'s array."""
    for leg in range(fares.shape[0]):
        _leg_acceptance_into(
            prob, fares[leg], capacities[leg], start[leg], leg_products[leg], value[leg],
            occupancy_out[leg], accept_out[leg],
        )


@njit(cache=True, nogil=True)
def _leg_count(product_legs: np.ndarray, j: int) -> int:
    """Number of legs of product j (rows of ``product_legs`` are padded with -1)."""
    k = 0
    while k < product_legs.shape[1] and product_legs[j, k] >= 0:
        k += 1
    return k


@njit(cache=True, nogil=True)
def split_direction(
    prob: np.ndarray, accept: np.ndarray, product_legs: np.ndarray, direction_out: np.ndarray
) -> float:
    """Scaled subgradient of the Lagrangian bound, projected on ``sum over legs = 0``.

    For a product j on k >= 2 legs and a period t with ``p[t, j] > 0`` the bound's subgradient
    with respect to ``lambda[i, t, j]`` is ``accept[i, t, j]``; scaled by ``1 / p[t, j]`` it is
    leg i's acceptance probability ``a_i``. Writes ``a_i - mean(a)`` into ``direction_out`` at
    those entries (others untouched) and returns the squared norm ``sum p * (a_i - mean)^2``
    (the squared subgradient norm in the metric of the scaling).
    """
    n_periods, n_products = prob.shape
    norm2 = 0.0
    for j in range(n_products):
        k = _leg_count(product_legs, j)
        if k < 2:
            continue
        for t in range(n_periods):
            p = prob[t, j]
            if p == 0.0:
                for m in range(k):
                    direction_out[product_legs[j, m], t, j] = 0.0
                continue
            mean = 0.0
            for m in range(k):
                mean += accept[product_legs[j, m], t, j]
            mean /= p * k
            for m in range(k):
                i = product_legs[j, m]
                d = accept[i, t, j] / p - mean
                direction_out[i, t, j] = d
                norm2 += p * d * d
    return norm2


@njit(cache=True, nogil=True)
def step_and_project(
    lam: np.ndarray,
    direction: np.ndarray,
    step: float,
    fares: np.ndarray,
    product_legs: np.ndarray,
    prob: np.ndarray,
    work: np.ndarray,
    lam_out: np.ndarray,
) -> None:
    """``lam_out = projection of lam - step * direction`` for multi-leg products and p > 0.

    The projection is the Euclidean one onto ``{lambda >= 0, sum over the legs = fare}`` (a
    scaled simplex; sort-based, Held, Wolfe & Crowder 1974). Other entries of ``lam_out`` are
    left as they are (``lam_out`` may be ``lam``). ``work`` is a scratch array with at least
    ``2 * product_legs.shape[1]`` entries.
    """
    n_periods, n_products = prob.shape
    for j in range(n_products):
        k = _leg_count(product_legs, j)
        if k < 2:
            continue
        f = fares[j]
        for t in range(n_periods):
            if prob[t, j] == 0.0:
                continue
            for m in range(k):
                i = product_legs[j, m]
                work[m] = lam[i, t, j] - step * direction[i, t, j]
            if k == 2:  # the usual case: a clip on the segment
                first = min(max(0.5 * (work[0] - work[1] + f), 0.0), f)
                lam_out[product_legs[j, 0], t, j] = first
                lam_out[product_legs[j, 1], t, j] = f - first
                continue
            for m in range(k):  # insertion sort, descending, into work[k:2k]
                y = work[m]
                pos = k + m
                while pos > k and work[pos - 1] < y:
                    work[pos] = work[pos - 1]
                    pos -= 1
                work[pos] = y
            cum = 0.0
            theta = 0.0
            for m in range(k):
                cum += work[k + m]
                cand = (cum - f) / (m + 1)
                if work[k + m] - cand > 0.0:
                    theta = cand
            for m in range(k):
                lam_out[product_legs[j, m], t, j] = max(work[m] - theta, 0.0)


@njit(cache=True, nogil=True)
def average_and_lower_bound(
    accept: np.ndarray,
    average: np.ndarray,
    weight: float,
    fares: np.ndarray,
    product_legs: np.ndarray,
) -> float:
    """Fold ``accept`` into the running mix ``average`` and return the bound it certifies.

    ``average = (1 - weight) * average + weight * accept`` on the incident entries. For any
    leg policies with sales probabilities ``q[i, t, j]``, ``sum_{t, j} f_j min_i q[i, t, j]``
    is a lower bound on the Lagrangian dual's minimum (each leg's value is at least the revenue
    of that policy at any fares, and the fares of a product sum to f_j over its legs); a mix of
    the iterates' policies is itself a (randomised) policy.
    """
    n_legs, n_periods, n_products = accept.shape
    lower = 0.0
    for j in range(n_products):
        k = _leg_count(product_legs, j)
        total = 0.0
        for t in range(n_periods):
            low = np.inf
            for m in range(k):
                i = product_legs[j, m]
                a = (1.0 - weight) * average[i, t, j] + weight * accept[i, t, j]
                average[i, t, j] = a
                if a < low:
                    low = a
            total += low
        lower += fares[j] * total
    return lower
