"""The static nested model under discrete demand: demand pmfs, expected sales and revenue of
nested protection levels, and the optimal levels.

Conventions of :mod:`rmkit.methods.shared.leg_heuristics`: classes numbered from 0, the highest
fare; the lowest class books first, the highest last; ``y_j`` protects classes 0..j against
class j+1.

Optimal static levels (Brumelle & McGill 1993). The optimal policy is nested; ``y_j`` is the
largest y whose marginal seat value, with classes j..0 still to book under the optimal inner
levels ``y_0..y_{j-1}``, exceeds ``f_{j+1}``. Brumelle & McGill write that value as
``f_0 P(S_0 > y_0, ..., S_{j-1} > y_{j-1}, S_j >= y)`` for continuous demand, from a sample-path
argument: with one seat more, the first class (in booking order j, j-1, .., 0) that sells one
more seat is the one that earns it. For discrete demand rmkit evaluates that sample path
exactly, ``EMSR_j(y) = sum_c f_c P(the y-th seat is first sold to class c)``, by a forward
recursion over the seats left (no backward value recursion; the single-leg DP checks it), and
sets ``y_j = #{y >= 1 : EMSR_j(y) > f_{j+1}}``.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from rmkit.errors import InputError, ProblemTooLargeError
from rmkit.methods.shared.leg_heuristics import (
    check_capacity,
    check_demand,
    check_fares,
    check_pmfs,
    tail_probability,
    tails_of_pmf,
)

#: The static-model recursions hold a few (C+1) x (C+1) arrays; refuse beyond this many bytes.
MEMORY_LIMIT = 2 * 2**30
#: ... and beyond this many multiply-adds (the optimal levels cost about k^2/2 (C+1)^3).
WORK_LIMIT = 5e10


def demand_pmf(
    means: Sequence[float] | np.ndarray,
    stds: Sequence[float] | np.ndarray | None,
    law: str,
    max_count: int,
) -> np.ndarray:
    """``(k, max_count+1)`` pmfs; the last column holds ``P(D >= max_count)``.

    The normal law is discretised with the continuity correction of the leg heuristics:
    ``P(D = d) = P(d - 1/2 < N <= d + 1/2)`` for d >= 1 and ``P(D = 0) = P(N <= 1/2)``.
    """
    n = check_capacity(max_count, "max_count")
    mu, sd = check_demand(means, stds, law, np.asarray(means).size)
    return demand_pmf_grid(mu, sd, law, n)


def demand_pmf_grid(means: np.ndarray, stds: np.ndarray | None, law: str, max_count: int) -> np.ndarray:
    """:func:`demand_pmf` for means of any shape (not re-checked): ``(..., max_count+1)``."""
    mu = np.asarray(means, dtype=np.float64)[..., None]
    d = np.arange(max_count + 1, dtype=np.float64)
    if law == "poisson":
        tails = tail_probability(law, mu, None, d)
    else:
        tails = tail_probability(law, mu, np.asarray(stds, dtype=np.float64)[..., None], d - 0.5)
        tails[..., 0] = 1.0  # the mass below zero books nothing
    return _pmf_from_tails(tails)


def _pmf_from_tails(tails: np.ndarray) -> np.ndarray:
    """Pmf over 0..N from ``P(D >= a)``, a = 0..N (last column lumps the tail)."""
    out = np.empty_like(tails)
    out[..., :-1] = tails[..., :-1] - tails[..., 1:]
    out[..., -1] = tails[..., -1]
    return np.clip(out, 0.0, 1.0)


def _padded(p: np.ndarray, capacity: int) -> np.ndarray:
    """Pmfs widened with zeros to cover 0..capacity (a shorter pmf is a bounded demand)."""
    if p.shape[1] >= capacity + 1:
        return p
    out = np.zeros((p.shape[0], capacity + 1))
    out[:, : p.shape[1]] = p
    return out


def _sales_transition(pmf: np.ndarray, tails: np.ndarray, room: np.ndarray) -> np.ndarray:
    """``T[x, x']`` = P(seats left go x -> x') when a class may take ``room[x]`` seats."""
    n = room.size
    xs = np.arange(n)
    sold = xs[:, None] - xs[None, :]
    capped = np.clip(sold, 0, pmf.size - 1)
    inside = (sold >= 0) & (sold < room[:, None])
    t = np.where(inside, pmf[capped], 0.0)
    t += np.where(sold == room[:, None], tails[np.clip(room, 0, tails.size - 1)][:, None], 0.0)
    return t


def _check_size(capacity: int, k: int, work: float, what: str) -> None:
    """Refuse a static-model computation whose arrays or arithmetic would be too large."""
    memory = 4 * 8 * (capacity + 1) ** 2
    if memory > MEMORY_LIMIT or work > WORK_LIMIT:
        raise ProblemTooLargeError(
            f"capacity: {what} with {capacity} seats and {k} classes needs about "
            f"{memory / 2**30:.1f} GiB and {work:.1e} multiply-adds (limits {MEMORY_LIMIT / 2**30:.0f} "
            f"GiB, {WORK_LIMIT:.0e}); use fewer seats, or the single-leg DP (rmkit.methods.shared.leg_dp)"
        )


def _check_protection(protection: object, k: int, capacity: int) -> np.ndarray:
    y = np.asarray(protection, dtype=np.float64).reshape(-1)
    if y.size != k - 1:
        raise InputError(f"protection: needs {k - 1} levels for {k} classes, got {y.size}")
    for j, v in enumerate(y.tolist()):
        if not np.isfinite(v) or v < 0 or v != round(v):
            raise InputError(
                f"protection[{j}]: level of classes 0..{j} must be a whole number >= 0, got {v!r}"
            )
    return np.minimum(y.astype(np.int64), capacity)


def nested_sales(pmfs: np.ndarray, capacity: int, protection: Sequence[int] | np.ndarray) -> np.ndarray:
    """Expected seats each class books under nested protection levels, static model.

    Classes book from k-1 (lowest) down to 0; class c books ``min(D_c, max(x - y_{c-1}, 0))``
    seats when x are left (``y_{-1} = 0``). Exact (a forward recursion over seats left).
    """
    p0 = np.asarray(pmfs, dtype=np.float64)
    k = p0.shape[0] if p0.ndim == 2 else 0
    c = check_capacity(capacity)
    p = check_pmfs(pmfs, k)
    y = _check_protection(protection, k, c)
    return nested_sales_batch(p[None], np.array([c]), y[None])[0]


def nested_sales_batch(pmfs: np.ndarray, capacity: np.ndarray, protection: np.ndarray) -> np.ndarray:
    """:func:`nested_sales` of B legs at once (inputs not re-checked): ``(B, k)``.

    ``pmfs`` ``(B, k, N+1)``, ``capacity`` ``(B,)`` whole numbers, ``protection`` ``(B, k-1)``
    whole numbers. Classes with no demand (pmf ``[1, 0, ...]``) may pad a leg's row.
    """
    n_legs, k = pmfs.shape[:2]
    cap = np.asarray(capacity, dtype=np.int64)
    c = int(cap.max(initial=0))
    _check_size(c, k, n_legs * k * (c + 1.0) ** 2, "the nested-limit revenue")
    y = np.minimum(np.asarray(protection, dtype=np.int64).reshape(n_legs, max(k - 1, 0)), c)
    width = max(pmfs.shape[2], c + 1)
    p = np.zeros((n_legs, k, width))
    p[..., : pmfs.shape[2]] = pmfs
    tails = np.concatenate([tails_of_pmf(p), np.zeros((n_legs, k, 1))], axis=-1)
    # E[min(D, a)] = sum_{d=1..a} P(D >= d), indexed by a
    expected = np.concatenate([np.zeros((n_legs, k, 1)), np.cumsum(tails[..., 1:], axis=-1)], axis=-1)
    xs = np.arange(c + 1)
    sold = xs[:, None] - xs[None, :]  # seats sold to go from x to x'
    capped = np.clip(sold, 0, width - 1)
    dist = np.zeros((n_legs, c + 1))
    dist[np.arange(n_legs), cap] = 1.0
    sales = np.zeros((n_legs, k))
    for j in range(k - 1, -1, -1):
        room = np.maximum(xs[None, :] - (y[:, j - 1 : j] if j >= 1 else 0), 0)  # (B, C+1)
        sales[:, j] = (dist * np.take_along_axis(expected[:, j], room, axis=1)).sum(axis=1)
        inside = (sold[None] >= 0) & (sold[None] < room[:, :, None])
        step = np.where(inside, p[:, j][:, capped], 0.0)
        edge = np.take_along_axis(tails[:, j], room, axis=1)  # P(D >= room): sells all it may
        step += np.where(sold[None] == room[:, :, None], edge[:, :, None], 0.0)
        dist = np.einsum("bx,bxy->by", dist, step)
    return sales


def nested_revenue(
    fares: Sequence[float] | np.ndarray,
    pmfs: np.ndarray,
    capacity: int,
    protection: Sequence[int] | np.ndarray,
) -> float:
    """Expected revenue of nested protection levels in the static low-before-high model."""
    f = check_fares(fares)
    check_pmfs(pmfs, f.size)
    return float(f @ nested_sales(pmfs, capacity, protection))


def optimal_protection_levels(
    fares: Sequence[float] | np.ndarray, pmfs: np.ndarray, capacity: int
) -> np.ndarray:
    """Optimal static nested protection levels (Brumelle & McGill 1993), each at most ``capacity``.

    Exact for discrete demand (see the module docstring); pmfs whose last column lumps a tail
    must reach at least ``capacity``.
    """
    f = check_fares(fares)
    c = check_capacity(capacity)
    _check_size(c, f.size, f.size**2 / 2 * (c + 1.0) ** 3, "the optimal nested levels")
    p = _padded(check_pmfs(pmfs, f.size), c)
    tails = np.append(tails_of_pmf(p), np.zeros((f.size, 1)), axis=1)
    xs = np.arange(c + 1)
    levels: list[int] = []
    for j in range(f.size - 1):
        reach = np.eye(c + 1)  # [y, x]: P(x seats left, marginal seat still unsold | start y)
        emsr = np.zeros(c + 1)
        for k in range(j, -1, -1):
            room = xs - (levels[k - 1] if k >= 1 else 0)
            first_sale = np.where(room >= 1, f[k] * tails[k, np.clip(room, 0, tails.shape[1] - 1)], 0.0)
            emsr += reach @ first_sale
            # the seat stays unsold while the class sells fewer than it could: x -> x - d, d < room
            step = _sales_transition(p[k], np.zeros_like(tails[k]), np.maximum(room, 0))
            step[room <= 0, :] = 0.0
            step[xs[room <= 0], xs[room <= 0]] = 1.0
            reach = reach @ step
        levels.append(int(np.count_nonzero(emsr[1:] > f[j + 1])))
    return np.array(levels, dtype=np.int64)
