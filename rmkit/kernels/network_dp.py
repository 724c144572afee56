"""numba kernels of the network dynamic program over the whole capacity grid.

The grid holds every capacity vector ``0 <= x <= c`` in row-major order: flat index
``s = sum_i x_i * stride_i``, the last leg's stride 1. Selling product j moves state s to
``s - d_j`` with ``d_j = sum_i A_ij stride_i``. Backward step for period k of the solve
(Talluri & van Ryzin 2004, section 3.1)::

    V(s) = Vn(s) + sum_j p[k, j] * max(0, f[k, j] - (Vn(s) - Vn(s - d_j)))   over feasible j

Layout of the work, chosen so the inner loop is long, contiguous and branch-free (it vectorises):

* Product j is feasible at s iff every leg it uses has a seat. For the legs other than the last
  this holds on *runs* of consecutive flat indices (one run per block of the slower legs, see
  ``rmkit.methods.shared.network_dp``), precomputed as ``run_start``/``run_stop`` with ``run_ptr`` per
  product.
* The last leg's condition ``x_last >= 1`` cuts every row; instead of splitting runs there, the
  products that use the last leg multiply their term by ``mask[s]`` (1.0, or 0.0 where
  ``x_last = 0``). Multiplying by 1.0 and adding 0.0 are exact, so the numbers are those of the
  plain recursion: on a one-leg network they equal ``rmkit.kernels.single_leg`` bit for bit
  (terms added in product order, no fused multiply-add).
* Indices are unsigned so numba emits no negative-index wraparound and LLVM vectorises.
* The decision bit ``f >= Vn(s) - Vn(s - d_j)`` (ties accept) is or-ed straight into one
  unsigned word per state and period (uint8 up to 8 products, uint16 up to 16, ...), whose
  little-endian bytes are the ``(K, S, ceil(n/8))`` decision bytes.
* On one thread only two value layers live at once, the two slots of one array (period k in
  slot k % 2). On two threads the grid is split in two and the halves run as a pipeline (see
  :func:`network_values`), which needs a few more slots. Each state sees the same operations
  in the same order either way, so results do not depend on the thread count.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange


@njit(cache=True)
def sweep(
    k_hi, k_lo, a, b, tile, layers, n_slots, prob, fare, offsets, masked, pair, run_start,
    run_stop, run_ptr, mask, word_mask, words, word_bit, keep_bits, probe, probe_out, cursor,
):
    """Periods ``k_hi`` down to ``k_lo`` on the flat states ``a .. b-1``.

    ``layers`` is ``(n_slots * S,)``: the values of period k live in slot ``k % n_slots``, so
    period k reads slot ``(k + 1) % n_slots`` and no array is ever swapped or re-bound (no
    reference counting in the loop). The range is swept in tiles of ``tile`` states so the tile
    being updated stays in the L1 cache while every product updates it. Decisions are or-ed into
    ``words[k, s * n_words + j // bits_per_word]`` (unsigned words of the dtype of ``word_bit``,
    zero on entry). ``probe_out[k, q]`` receives ``V_{k+1}[probe[q]]`` for the probes in
    ``a .. b-1``. ``pair[j] = 1`` marks a product whose successor uses the same legs (and the
    same decision word): the two share one pass. ``cursor`` (n,) int64 is scratch. Indices
    ``a``, ``b``, ``tile``,
    ``offsets``, ``run_start``, ``run_stop`` are uint64.
    """
    n_products = prob.shape[1]
    n_states = np.uint64(mask.size)
    n_words = np.uint64(words.shape[1]) // n_states
    per_word = 8 * word_bit.itemsize
    for k in range(k_hi, k_lo - 1, -1):
        co = np.uint64(k % n_slots) * n_states  # this period's values
        no = np.uint64((k + 1) % n_slots) * n_states  # the next period's
        for q in range(probe.size):
            if a <= probe[q] < b:
                probe_out[k, q] = layers[no + np.uint64(probe[q])]
        for j in range(n_products):
            cursor[j] = run_ptr[j]
        ta = a
        while ta < b:
            tb = min(ta + tile, b)
            for s in range(ta, tb):
                layers[co + s] = layers[no + s]
            j = 0
            while j < n_products:
                p = prob[k, j]
                f = fare[k, j]
                nd = no - offsets[j]  # layers[nd + s] = V_{k+1}(s - d_j)
                bit = word_bit[j]
                zero = bit ^ bit
                w = np.uint64(j // per_word)
                two = pair[j] != 0 and (n_words == 1 or not keep_bits)
                j2 = j + 1 if two else j  # with a pair: product j + 1, same legs, same word
                p2 = prob[k, j2]
                f2 = fare[k, j2]
                bit2 = word_bit[j2]
                r = cursor[j]
                stop = run_ptr[j + 1]
                while r < stop and run_stop[r] <= ta:
                    r += 1
                cursor[j] = r
                while r < stop and run_start[r] < tb:
                    lo = max(run_start[r], ta)
                    hi = min(run_stop[r], tb)
                    r += 1
                    if two:
                        # two products on the same legs share the opportunity cost; their
                        # terms are still added one after the other, in product order
                        if masked[j] and keep_bits:
                            for s in range(lo, hi):
                                cost = layers[no + s] - layers[nd + s]
                                g1 = f - cost
                                g2 = f2 - cost
                                layers[co + s] += p * (max(g1, 0.0) * mask[s])
                                layers[co + s] += p2 * (max(g2, 0.0) * mask[s])
                                words[k, s] |= ((bit if g1 >= 0.0 else zero)
                                                | (bit2 if g2 >= 0.0 else zero)) & word_mask[s]
                        elif keep_bits:
                            for s in range(lo, hi):
                                cost = layers[no + s] - layers[nd + s]
                                g1 = f - cost
                                g2 = f2 - cost
                                layers[co + s] += p * max(g1, 0.0)
                                layers[co + s] += p2 * max(g2, 0.0)
                                words[k, s] |= (bit if g1 >= 0.0 else zero) | (
                                    bit2 if g2 >= 0.0 else zero)
                        elif masked[j]:
                            for s in range(lo, hi):
                                cost = layers[no + s] - layers[nd + s]
                                layers[co + s] += p * (max(f - cost, 0.0) * mask[s])
                                layers[co + s] += p2 * (max(f2 - cost, 0.0) * mask[s])
                        else:
                            for s in range(lo, hi):
                                cost = layers[no + s] - layers[nd + s]
                                layers[co + s] += p * max(f - cost, 0.0)
                                layers[co + s] += p2 * max(f2 - cost, 0.0)
                    elif not keep_bits:
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
                j = j2 + 1
            ta = tb


@njit(cache=True, parallel=True)
def network_values(
    prob, fare, offsets, masked, pair, run_start, run_stop, run_ptr, mask, word_mask,
    layers, n_slots, words, word_bit, keep_bits, probe, probe_out, tile, split, batch,
):
    """Backward pass over ``K = prob.shape[0]`` periods on two threads, as a pipeline.

    Selling only ever moves to a lower flat index, so the states below ``split`` never read
    those above it: thread 0 sweeps ``0 .. split-1`` through a batch of ``batch`` periods while
    thread 1 sweeps ``split .. S-1`` through the batch before, reading thread 0's values of those
    periods from their slots. With ``n_slots >= 2 * batch + 1`` slots no value is overwritten
    before it is read, and the threads meet once per batch rather than once per period, so a
    thread held up by a busy machine stalls the other far less often.

    ``layers`` is ``(n_slots * S,)`` zeros on entry; on exit slot 0 holds the first period's
    values and slot 1 the second's (``V_{t0+1}``). ``words`` is ``(K, S * n_words)`` zeros of an
    unsigned dtype, receiving the decisions when ``keep_bits`` (see :func:`sweep`); ``word_mask``
    (S,) of that dtype is all ones where ``x_last >= 1``; ``probe_out[k, q]`` receives
    ``V_{t0+k+1}[probe[q]]``; ``tile`` and ``split`` are uint64.
    """
    n_periods, n_products = prob.shape
    n_states = np.uint64(mask.size)
    cursor = np.empty((2, n_products), dtype=np.int64)
    n_batches = (n_periods + batch - 1) // batch
    for r in range(n_batches + 1):
        for c in prange(2):
            m = r - c  # thread 1 works one batch behind thread 0
            if 0 <= m < n_batches:
                k_hi = n_periods - 1 - m * batch
                k_lo = max(0, k_hi - batch + 1)
                a = np.uint64(0) if c == 0 else split
                b = split if c == 0 else n_states
                sweep(
                    k_hi, k_lo, a, b, tile, layers, n_slots, prob, fare, offsets, masked, pair,
                    run_start, run_stop, run_ptr, mask, word_mask, words, word_bit, keep_bits,
                    probe, probe_out, cursor[c],
                )


@njit(cache=True)
def network_values_serial(
    prob, fare, offsets, masked, pair, run_start, run_stop, run_ptr, mask, word_mask,
    layers, words, word_bit, keep_bits, probe, probe_out, tile,
):
    """The backward pass on one thread, two value slots: one call sweeps every period."""
    n_periods, n_products = prob.shape
    cursor = np.empty(n_products, dtype=np.int64)
    sweep(
        n_periods - 1, 0, np.uint64(0), np.uint64(mask.size), tile, layers, 2, prob, fare,
        offsets, masked, pair, run_start, run_stop, run_ptr, mask, word_mask, words, word_bit,
        keep_bits, probe, probe_out, cursor,
    )
