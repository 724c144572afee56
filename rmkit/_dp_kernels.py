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
* Only two value layers live at once. In the parallel kernel every period's flat range is cut
  into one chunk per thread (numba ``prange``); chunks write disjoint states and each state sees
  the same operations in the same order, so results do not depend on the thread count.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange


@njit(cache=True, inline="always")
def chunk_step(
    k, a, b, tile, nxt, cur, prob, fare, offsets, masked, run_start, run_stop, run_ptr,
    mask, word_mask, words, word_bit, keep_bits, cursor,
):
    """One period's update of the flat states ``a .. b-1`` (values and, if kept, decisions).

    The range is swept in tiles of ``tile`` states so the tile of ``cur`` stays in the L1 cache
    while every product updates it. Decisions are or-ed into ``words[k, s * n_words + w]``
    (unsigned words of the dtype of ``word_bit``; product j sets ``word_bit[j]`` in word
    ``j // bits_per_word``), which must be zero on entry. ``cursor`` (n,) int64 is scratch.
    Indices ``a``, ``b``, ``tile``, ``offsets``, ``run_start``, ``run_stop`` are uint64.
    """
    n_products = prob.shape[1]
    n_words = np.uint64(words.shape[1] // nxt.size)
    per_word = 8 * word_bit.itemsize
    for j in range(n_products):
        cursor[j] = run_ptr[j]
    ta = a
    while ta < b:
        tb = min(ta + tile, b)
        for s in range(ta, tb):
            cur[s] = nxt[s]
        for j in range(n_products):
            p = prob[k, j]
            f = fare[k, j]
            d = offsets[j]
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
                            cur[s] += p * (max(f - (nxt[s] - nxt[s - d]), 0.0) * mask[s])
                    else:
                        for s in range(lo, hi):
                            cur[s] += p * max(f - (nxt[s] - nxt[s - d]), 0.0)
                elif n_words == 1:
                    row = words[k]
                    if masked[j]:
                        for s in range(lo, hi):
                            gain = f - (nxt[s] - nxt[s - d])
                            cur[s] += p * (max(gain, 0.0) * mask[s])
                            row[s] |= (bit if gain >= 0.0 else zero) & word_mask[s]
                    else:
                        for s in range(lo, hi):
                            gain = f - (nxt[s] - nxt[s - d])
                            cur[s] += p * max(gain, 0.0)
                            row[s] |= bit if gain >= 0.0 else zero
                else:  # more than 64 products: strided words
                    row = words[k]
                    for s in range(lo, hi):
                        gain = f - (nxt[s] - nxt[s - d])
                        on = gain >= 0.0 and (not masked[j] or mask[s] != 0.0)
                        cur[s] += p * (max(gain, 0.0) * mask[s]) if masked[j] else p * max(
                            gain, 0.0
                        )
                        row[s * n_words + w] |= bit if on else zero
        ta = tb


@njit(cache=True)
def _swap(a, b):
    for s in range(a.size):
        tmp = a[s]
        a[s] = b[s]
        b[s] = tmp


@njit(cache=True, parallel=True)
def network_values(
    prob, fare, offsets, masked, run_start, run_stop, run_ptr, mask, word_mask,
    values, spare, words, word_bit, keep_bits, probe, probe_out, tile, n_chunks,
):
    """Backward pass over ``K = prob.shape[0]`` periods, each period split into ``n_chunks``.

    On entry ``values`` holds the terminal layer (zeros); on exit it holds the first period's
    values and ``spare`` the second period's (``V_{t0+1}``). ``words`` is ``(K, S * n_words)``
    zeros of an unsigned dtype, receiving the decisions when ``keep_bits`` (see
    :func:`chunk_step`); ``word_mask`` (S,) of that dtype is all ones where ``x_last >= 1``;
    ``probe_out[k, q]`` receives ``V_{t0+k+1}[probe[q]]``; ``tile`` (uint64) the states swept
    at a time.
    """
    n_periods = prob.shape[0]
    n_states = values.size
    cursor = np.empty((n_chunks, prob.shape[1]), dtype=np.int64)
    nxt = values
    cur = spare
    for k in range(n_periods - 1, -1, -1):
        for q in range(probe.size):
            probe_out[k, q] = nxt[probe[q]]
        for c in prange(n_chunks):
            a = np.uint64((n_states * c) // n_chunks)
            b = np.uint64((n_states * (c + 1)) // n_chunks)
            chunk_step(
                k, a, b, tile, nxt, cur, prob, fare, offsets, masked, run_start, run_stop,
                run_ptr, mask, word_mask, words, word_bit, keep_bits, cursor[c],
            )
        nxt, cur = cur, nxt
    if n_periods % 2 == 1:  # the latest layer sits in `spare`: swap contents back
        _swap(values, spare)


@njit(cache=True)
def network_values_serial(
    prob, fare, offsets, masked, run_start, run_stop, run_ptr, mask, word_mask,
    values, spare, words, word_bit, keep_bits, probe, probe_out, tile,
):
    """:func:`network_values` on one thread (no parallel launch per period: small grids)."""
    n_periods = prob.shape[0]
    n_states = values.size
    nxt = values
    cur = spare
    a = np.uint64(0)
    b = np.uint64(n_states)
    cursor = np.empty(prob.shape[1], dtype=np.int64)
    for k in range(n_periods - 1, -1, -1):
        for q in range(probe.size):
            probe_out[k, q] = nxt[probe[q]]
        chunk_step(
            k, a, b, tile, nxt, cur, prob, fare, offsets, masked, run_start, run_stop, run_ptr,
            mask, word_mask, words, word_bit, keep_bits, cursor,
        )
        nxt, cur = cur, nxt
    if n_periods % 2 == 1:
        _swap(values, spare)


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
