"""numba kernels of the network dynamic program over the whole capacity grid.

The grid holds every capacity vector ``0 <= x <= c`` in row-major order: flat index
``s = sum_i x_i * stride_i``, the last leg's stride 1. Selling product j moves state s to
``s - d_j`` with ``d_j = sum_i A_ij stride_i``. Backward step for period k of the solve
(Talluri & van Ryzin 2004, section 3.1)::

    V(s) = Vn(s) + sum_j p[k, j] * max(0, f[k, j] - (Vn(s) - Vn(s - d_j)))   over feasible j

Layout of the work, chosen so the inner loop is long, contiguous and branch-free (it vectorises):

* Product j is feasible at s iff every leg it uses has a seat. For the legs other than the last
  this holds on *runs* of consecutive flat indices (one run per block of the slower legs, see
  ``rmkit.exact_dp``), precomputed as ``run_start``/``run_stop`` with ``run_ptr`` per product.
* The last leg's condition ``x_last >= 1`` cuts every row; instead of splitting runs there, the
  products that use the last leg multiply their term by ``mask[s]`` (1.0, or 0.0 where
  ``x_last = 0``). Multiplying by 1.0 and adding 0.0 are exact, so the numbers are those of the
  plain recursion: on a one-leg network they equal ``rmkit._single_leg_kernels`` bit for bit
  (terms added in product order, no fused multiply-add).
* Indices are unsigned so numba emits no negative-index wraparound and LLVM vectorises.
* The decision bit ``f >= Vn(s) - Vn(s - d_j)`` (ties accept) is or-ed straight into one
  unsigned word per state and period (uint8 up to 8 products, uint16 up to 16, ...), whose
  little-endian bytes are the ``(K, S, ceil(n/8))`` decision bytes.
* Only two value layers live at once, the two halves of one array (period k in half k % 2).
  In the parallel kernel every period's flat range is cut
  into one chunk per thread (numba ``prange``); chunks write disjoint states and each state sees
  the same operations in the same order, so results do not depend on the thread count.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange


@njit(cache=True)
def sweep(
    k_hi, k_lo, a, b, tile, layers, prob, fare, offsets, masked, run_start, run_stop, run_ptr,
    mask, word_mask, words, word_bit, keep_bits, record_probe, probe, probe_out, cursor,
):
    """Periods ``k_hi`` down to ``k_lo`` on the flat states ``a .. b-1``.

    ``layers`` is ``(2 S,)``: the values of period k live at offset ``(k % 2) * S``, so period
    k reads the other half and no array is ever swapped or re-bound (no reference counting in
    the loop). The range is swept in tiles of ``tile`` states so the tile being updated stays in
    the L1 cache while every product updates it. Decisions are or-ed into
    ``words[k, s * n_words + j // bits_per_word]`` (unsigned words of the dtype of ``word_bit``,
    zero on entry). When ``record_probe``, ``probe_out[k, q]`` receives ``V_{k+1}[probe[q]]``.
    ``cursor`` (n,) int64 is scratch. Indices ``a``, ``b``, ``tile``, ``offsets``, ``run_start``,
    ``run_stop`` are uint64.
    """
    n_products = prob.shape[1]
    n_states = np.uint64(layers.size // 2)
    n_words = np.uint64(words.shape[1]) // n_states
    per_word = 8 * word_bit.itemsize
    for k in range(k_hi, k_lo - 1, -1):
        co = np.uint64(k % 2) * n_states  # this period's values
        no = np.uint64((k + 1) % 2) * n_states  # the next period's
        if record_probe:
            for q in range(probe.size):
                probe_out[k, q] = layers[no + np.uint64(probe[q])]
        for j in range(n_products):
            cursor[j] = run_ptr[j]
        ta = a
        while ta < b:
            tb = min(ta + tile, b)
            for s in range(ta, tb):
                layers[co + s] = layers[no + s]
            for j in range(n_products):
                p = prob[k, j]
                f = fare[k, j]
                nd = no - offsets[j]  # layers[nd + s] = V_{k+1}(s - d_j)
                bit = word_bit[j]
                zero = bit ^ bit
                w = np.uint64(j // per_word)
                r = cursor[j]
                stop = run_ptr[j + 1]
                while r < stop and run_stop[r] <= ta:
                    r += 1
                cursor[j] = r
                while r < stop and run_start[r] < tb:
                    lo = max(run_start[r], ta)
                    hi = min(run_stop[r], tb)
                    r += 1
                    if not keep_bits:
                        if masked[j]:
                            for s in range(lo, hi):
                                gain = f - (layers[no + s] - layers[nd + s])
                                layers[co + s] += p * (max(gain, 0.0) * mask[s])
                        else:
                            for s in range(lo, hi):
                                gain = f - (layers[no + s] - layers[nd + s])
                                layers[co + s] += p * max(gain, 0.0)
                    elif n_words == 1:
                        if masked[j]:
                            for s in range(lo, hi):
                                gain = f - (layers[no + s] - layers[nd + s])
                                layers[co + s] += p * (max(gain, 0.0) * mask[s])
                                words[k, s] |= (bit if gain >= 0.0 else zero) & word_mask[s]
                        else:
                            for s in range(lo, hi):
                                gain = f - (layers[no + s] - layers[nd + s])
                                layers[co + s] += p * max(gain, 0.0)
                                words[k, s] |= bit if gain >= 0.0 else zero
                    else:  # more than 64 products: strided words
                        for s in range(lo, hi):
                            gain = f - (layers[no + s] - layers[nd + s])
                            m = mask[s] if masked[j] else 1.0
                            layers[co + s] += p * (max(gain, 0.0) * m)
                            if gain >= 0.0 and m != 0.0:
                                words[k, s * n_words + w] |= bit
            ta = tb


@njit(cache=True, parallel=True)
def network_values(
    prob, fare, offsets, masked, run_start, run_stop, run_ptr, mask, word_mask,
    layers, words, word_bit, keep_bits, probe, probe_out, tile, n_chunks,
):
    """Backward pass over ``K = prob.shape[0]`` periods, each period split into ``n_chunks``.

    ``layers`` is ``(2 S,)`` zeros on entry; on exit its first half holds the first period's
    values and its second half the second period's (``V_{t0+1}``). ``words`` is
    ``(K, S * n_words)`` zeros of an unsigned dtype, receiving the decisions when ``keep_bits``
    (see :func:`sweep`); ``word_mask`` (S,) of that dtype is all ones where ``x_last >= 1``;
    ``probe_out[k, q]`` receives ``V_{t0+k+1}[probe[q]]``; ``tile`` (uint64) is the number of
    states swept at a time.
    """
    n_periods, n_products = prob.shape
    n_states = layers.size // 2
    cursor = np.empty((n_chunks, n_products), dtype=np.int64)
    for k in range(n_periods - 1, -1, -1):
        for c in prange(n_chunks):
            a = np.uint64((n_states * c) // n_chunks)
            b = np.uint64((n_states * (c + 1)) // n_chunks)
            sweep(
                k, k, a, b, tile, layers, prob, fare, offsets, masked, run_start, run_stop,
                run_ptr, mask, word_mask, words, word_bit, keep_bits, c == 0, probe, probe_out,
                cursor[c],
            )


@njit(cache=True)
def network_values_serial(
    prob, fare, offsets, masked, run_start, run_stop, run_ptr, mask, word_mask,
    layers, words, word_bit, keep_bits, probe, probe_out, tile,
):
    """:func:`network_values` on one thread: one call sweeps every period (small grids)."""
    n_periods, n_products = prob.shape
    cursor = np.empty(n_products, dtype=np.int64)
    sweep(
        n_periods - 1, 0, np.uint64(0), np.uint64(layers.size // 2), tile, layers, prob, fare,
        offsets, masked, run_start, run_stop, run_ptr, mask, word_mask, words, word_bit,
        keep_bits, True, probe, probe_out, cursor,
    )


@njit(cache=True)
def visit_probabilities(
    prob, offsets, masked, run_start, run_stop, run_ptr, umask, bits, start, keep, out, now, later
):
    """Forward recursion of the state distribution under the policy in ``bits``.

    ``now`` and ``later`` are ``(S,)`` zeros; ``start`` is the flat index of the state at the
    first period. ``keep`` lists (sorted) the period offsets k whose distribution (at the start
    of period k, ``k = K`` meaning after the last period) goes to ``out[i]``. In period k the mass
    at s moves to ``s - d_j`` with probability ``p[k, j]`` where the policy accepts j.
    """
    n_periods, n_products = prob.shape
    n_states = now.size
    now[start] = 1.0
    i = 0
    for k in range(n_periods + 1):
        while i < keep.size and keep[i] == k:
            out[i, :] = now
            i += 1
        if i == keep.size or k == n_periods:
            return
        for s in range(n_states):
            later[s] = now[s]
        for j in range(n_products):
            p = prob[k, j]
            d = offsets[j]
            g = j // 8
            bit = np.uint8(1 << (j % 8))
            for r in range(run_ptr[j], run_ptr[j + 1]):
                for s in range(run_start[r], run_stop[r]):
                    take = (bits[k, s, g] & bit) != 0
                    if masked[j]:
                        take = take and umask[s] != 0
                    moved = now[s] * p if take else 0.0
                    later[s] -= moved
                    later[s - d] += moved
        for s in range(n_states):
            now[s] = later[s]
