"""numba helpers shared by the choice kernels: the best subset of one component.

Layout of ``prob`` and the rule are those of :mod:`rmkit.methods.shared.offer_sets`: the q-th
product of a component with ``nc`` products has its sale probabilities for the ``2**nc`` subsets
at ``prob[base + q * 2**nc : base + (q + 1) * 2**nc]``.
"""

from __future__ import annotations

import numpy as np
from numba import njit


@njit(cache=True, inline="always")
def best_subset(prob, base, nc, r, allowed, val):
    """The subset of ``allowed`` (bits over the component's products) maximising
    ``sum_q prob[.., q, sub] * r[q]``; ties keep the first in descending order of ``sub``, so
    ``allowed`` itself wins a tie. ``val`` (>= 2**nc) is scratch. Products outside ``allowed``
    must have a finite ``r`` (they enter the sums only with probability 0 or are masked out)."""
    n_sub = 1 << nc
    for sub in range(n_sub):
        val[sub] = 0.0
    for q in range(nc):
        rq = r[q]
        off = base + q * n_sub
        for sub in range(n_sub):  # contiguous and branch-free: vectorises
            val[sub] += prob[off + sub] * rq
    best = -1.0  # every subset of `allowed` is worth >= 0 (its products have r >= 0)
    best_sub = 0
    for sub in range(n_sub - 1, 0, -1):
        if (sub & ~allowed) == 0 and val[sub] > best:
            best = val[sub]
            best_sub = sub
    return best_sub


@njit(cache=True, inline="always")
def add_best(prob, base, nc, g, allowed, val, v):
    """``(v + gain of the best subset, the subset)``; the gain is added product by product in
    ascending order (the order the independent-demand DP adds its terms)."""
    sub = best_subset(prob, base, nc, g, allowed, val)
    n_sub = 1 << nc
    for q in range(nc):
        if (sub >> q) & 1:
            v += prob[base + q * n_sub + sub] * g[q]
    return v, sub


@njit(cache=True)
def scratch(comp_ptr):
    """Scratch arrays ``(g, val)`` wide enough for the largest component."""
    widest = 0
    for c in range(comp_ptr.size - 1):
        widest = max(widest, comp_ptr[c + 1] - comp_ptr[c])
    return np.zeros(max(widest, 1)), np.zeros(1 << widest)
