"""numba kernels of the choice dynamic programs: the exact network DP and the leg DPs of the
decomposition, both maximising over offer sets component by component.

Exact network DP (Talluri & van Ryzin 2004, sec. 7.3; Liu & van Ryzin 2008, eq. (1)), with
``g_j(x) = f_j - (V_{t+1}(x) - V_{t+1}(x - A_j))``::

    V_t(x) = V_{t+1}(x) + max_{S feasible at x} sum_{j in S} P_tj(S) g_j(x).

The max splits over components (:mod:`rmkit.methods.shared.offer_sets`); each component's best
subset is searched among its feasible products with ``g_j >= 0``. The value is then accumulated
as ``V += P g`` product after product (components in order, products ascending), so with one
segment per product the numbers are those of :mod:`rmkit.kernels.network_dp` bit for bit.
The chosen set's bits (bit j = product j offered) go to ``words[k, s]``.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from rmkit.kernels.offer_sets import add_best, scratch


@njit(cache=True)
def choice_values(comp_ptr, comp_product, set_ptr, prob, epoch, fares, offsets, feasible,
                  layers, words, keep_bits, probe, probe_out):
    """Backward pass over ``K = epoch.size`` periods on the whole grid.

    ``offsets[j] = A_j . strides``; ``feasible[s]`` has bit j set when product j has a seat on
    each of its legs at flat state s. ``layers`` is ``(2, S)`` zeros; on exit row 0 holds the
    first period's values and row 1 the next one's. ``words`` is ``(K, S)`` of an unsigned
    dtype (or ``(1, 1)`` without ``keep_bits``). ``probe_out[k, q]`` receives
    ``V_{k+1}[probe[q]]``.
    """
    n_periods = epoch.size
    n_states = feasible.size
    n_comp = comp_ptr.size - 1
    g, val = scratch(comp_ptr)
    for k in range(n_periods - 1, -1, -1):
        cur = layers[k % 2]
        nxt = layers[(k + 1) % 2]
        row = prob[epoch[k]]
        for q in range(probe.size):
            probe_out[k, q] = nxt[probe[q]]
        for s in range(n_states):
            here = nxt[s]
            v = here
            word = np.uint64(0)
            feas = feasible[s]
            for c in range(n_comp):
                lo = comp_ptr[c]
                nc = comp_ptr[c + 1] - lo
                allowed = 0
                for q in range(nc):
                    j = comp_product[lo + q]
                    g[q] = 0.0
                    if (feas >> np.uint64(j)) & np.uint64(1):
                        gain = fares[j] - (here - nxt[s - offsets[j]])
                        if gain >= 0.0:
                            g[q] = gain
                            allowed |= 1 << q
                if allowed == 0:
                    continue
                v, sub = add_best(row, set_ptr[c], nc, g, allowed, val, v)
                for q in range(nc):
                    if (sub >> q) & 1:
                        word |= np.uint64(1) << np.uint64(comp_product[lo + q])
            cur[s] = v
            if keep_bits:
                words[k, s] = word


@njit(cache=True)
def choice_leg_values(comp_ptr, comp_product, set_ptr, prob, epoch, base_fare, on_leg,
                      capacity, values):
    """One leg's DP of the choice decomposition (Liu & van Ryzin 2008, sec. 4)::

        v(t, x) = v(t+1, x) + max_S sum_{j in S} P_tj(S) (r_j - on_leg_j (v(t+1, x) - v(t+1, x-1)))

    where ``r_j`` (``base_fare``) is the fare less the other legs' bid prices, and products on
    the leg cannot be offered at x = 0. ``values`` is ``(K + 1, capacity + 1)`` with row K zero
    on entry; rows ``0 .. K-1`` are filled.
    """
    n_periods = epoch.size
    n_comp = comp_ptr.size - 1
    g, val = scratch(comp_ptr)
    for k in range(n_periods - 1, -1, -1):
        row = prob[epoch[k]]
        for x in range(capacity + 1):
            here = values[k + 1, x]
            seat = here - values[k + 1, x - 1] if x > 0 else 0.0
            v = here
            for c in range(n_comp):
                lo = comp_ptr[c]
                nc = comp_ptr[c + 1] - lo
                allowed = 0
                for q in range(nc):
                    j = comp_product[lo + q]
                    g[q] = 0.0
                    if on_leg[j] and x == 0:
                        continue
                    gain = base_fare[j] - (seat if on_leg[j] else 0.0)
                    if gain >= 0.0:
                        g[q] = gain
                        allowed |= 1 << q
                if allowed == 0:
                    continue
                v, _ = add_best(row, set_ptr[c], nc, g, allowed, val, v)
            values[k, x] = v
