"""numba kernels of the penalised perfect-information bound (``ir``); no validation, no RNG.

For each sampled request stream the kernel evaluates the Lagrangian dual of the path's inner
problem (see :mod:`rmkit.methods.ir` for the maths): one DP per leg over the leg's own seats,
visiting only the periods whose request uses the leg (between them the leg's terms telescope to
differences of its value function), plus projected subgradient steps on the multipliers that tie
the legs of each realized multi-leg request to one decision.

Arrays: ``streams (N, T)`` int32 product index or -1; ``values (L, T+1, W)`` leg value functions
(``values[i, T] = 0``); ``lam (L, T, n)`` fare split; ``prob (T, n)``; ``legs (n, K)`` the legs of
each product padded with -1; ``start (L,)`` seats at period 0.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange


@njit(cache=True)
def _path_dual(stream, values, lam, prob, legs, start, events, slots, counts, eta, accept,
               work, nxt, decision) -> float:
    """Sum over legs of the leg path DPs at multipliers ``eta``; fills ``decision (T, K)``."""
    n_legs = values.shape[0]
    n_periods = stream.shape[0]
    total = 0.0
    for i in range(n_legs):
        c = start[i]
        for x in range(c + 1):
            work[x] = 0.0
        later = n_periods  # first period of the block after the current event
        for e in range(counts[i] - 1, -1, -1):
            t = events[i, e]
            k = stream[t]
            for x in range(c + 1):  # periods t+1 .. later-1 carry no request for this leg
                nxt[x] = values[i, t + 1, x] - values[i, later, x] + work[x]
            p = prob[t, k]
            share = lam[i, t, k]
            bonus = eta[t, slots[i, e]]
            work[0] = nxt[0]
            accept[e, 0] = False
            for x in range(1, c + 1):
                d = values[i, t + 1, x] - values[i, t + 1, x - 1]
                others = values[i, t, x] - values[i, t + 1, x] - p * max(share - d, 0.0)
                sell = d + p * (share - d) + bonus + nxt[x - 1]
                if sell > nxt[x]:
                    work[x] = others + sell
                    accept[e, x] = True
                else:
                    work[x] = others + nxt[x]
                    accept[e, x] = False
            later = t
        total += values[i, 0, c] - values[i, later, c] + work[c]
        x = c
        for e in range(counts[i]):
            sold = accept[e, x]
            decision[events[i, e], slots[i, e]] = 1.0 if sold else 0.0
            if sold:
                x -= 1
    return total


@njit(cache=True)
def _coupling_step(stream, legs, decision, eta, step) -> float:
    """Move ``eta`` against the disagreement of the legs' decisions; return its squared norm."""
    norm2 = 0.0
    for t in range(stream.shape[0]):
        k = stream[t]
        if k < 0 or legs.shape[1] < 2 or legs[k, 1] < 0:
            continue
        count = 0
        total = 0.0
        for s in range(legs.shape[1]):
            if legs[k, s] < 0:
                break
            total += decision[t, s]
            count += 1
        mean = total / count
        for s in range(count):
            g = decision[t, s] - mean
            norm2 += g * g
            eta[t, s] -= step * g
    return norm2


@njit(cache=True, parallel=True)
def penalised_path_bounds(streams, values, lam, prob, legs, start, iterations, step,
                          first_out, best_out, agreed_out) -> None:
    """Per path: the dual at zero multipliers (``first_out``), the least dual over the
    iterations (``best_out``) and whether the legs' decisions agreed (``agreed_out``).

    Step ``k`` (0-based) moves the multipliers by ``step / sqrt(k + 1)`` times the
    disagreement; the run stops early on a path whose legs agree (the dual is then attained by
    a joint decision, so it is the inner maximum).
    """
    n_paths, n_periods = streams.shape
    n_legs = values.shape[0]
    width = values.shape[2]
    slots_per_product = legs.shape[1]
    for n in prange(n_paths):
        stream = streams[n]
        events = np.empty((n_legs, n_periods), dtype=np.int64)
        slots = np.empty((n_legs, n_periods), dtype=np.int64)
        counts = np.zeros(n_legs, dtype=np.int64)
        for t in range(n_periods):
            k = stream[t]
            if k < 0:
                continue
            for s in range(slots_per_product):
                i = legs[k, s]
                if i < 0:
                    break
                events[i, counts[i]] = t
                slots[i, counts[i]] = s
                counts[i] += 1
        eta = np.zeros((n_periods, slots_per_product))
        decision = np.zeros((n_periods, slots_per_product))
        accept = np.empty((n_periods, width), dtype=np.bool_)
        work = np.empty(width)
        nxt = np.empty(width)
        best = np.inf
        agreed = False
        for it in range(iterations):
            total = _path_dual(stream, values, lam, prob, legs, start, events, slots, counts,
                               eta, accept, work, nxt, decision)
            if it == 0:
                first_out[n] = total
            best = min(best, total)
            if _coupling_step(stream, legs, decision, eta, step / np.sqrt(it + 1.0)) == 0.0:
                agreed = True
                break
        best_out[n] = best
        agreed_out[n] = agreed


@njit(cache=True)
def state_gains(values, prob, fares, incidence, states, gain_out, full_out) -> None:
    """Per period and network state: each product's net gain and the rule-choice total.

    ``states (S, L)`` lists the seat vectors; ``gain_out (T, S, n)`` receives ``f_j - sum_{i in
    j} (v_i(t+1, x_i) - v_i(t+1, x_i - 1))`` (-inf where a leg of j has no seat) and ``full_out
    (T, S)`` receives ``sum_j p_tj max(gain, 0)``.
    """
    n_periods, n = prob.shape
    n_states, n_legs = states.shape
    for t in range(n_periods):
        for s in range(n_states):
            full = 0.0
            for j in range(n):
                g = fares[j]
                for i in range(n_legs):
                    if incidence[i, j] == 0:
                        continue
                    x = states[s, i]
                    if x == 0:
                        g = -np.inf
                        break
                    g -= values[i, t + 1, x] - values[i, t + 1, x - 1]
                gain_out[t, s, j] = g
                if g > 0.0:
                    full += prob[t, j] * g
            full_out[t, s] = full


@njit(cache=True, parallel=True)
def exact_path_bounds(streams, prob, fares, gain, full, offsets, start_state, out) -> None:
    """Per path: the penalised maximum by a DP over every network state (module ``ir``).

    ``offsets (n,)`` is the state-index change of selling product j (states are numbered in
    mixed radix so that selling j moves from s to ``s - offsets[j]``); ``out (N,)``.
    """
    n_paths, n_periods = streams.shape
    n_states = full.shape[1]
    for n in prange(n_paths):
        later = np.zeros(n_states)
        now = np.empty(n_states)
        for t in range(n_periods - 1, -1, -1):
            k = streams[n, t]
            for s in range(n_states):
                best = later[s]
                base = full[t, s]
                if k >= 0:
                    g = gain[t, s, k]
                    if g > -np.inf:
                        if g > 0.0:
                            base -= prob[t, k] * g
                        sell = prob[t, k] * fares[k] + (1.0 - prob[t, k]) * (fares[k] - g) \
                            + later[s - offsets[k]]
                        best = max(best, sell)
                now[s] = base + best
            later, now = now, later
        out[n] = later[start_state]
