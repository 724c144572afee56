"""One-step rollout of a bid-price-table policy: accept a request when simulating the base policy
on from both outcomes says accepting pays.

The result carries the base policy's ``bid_price_table`` ``B`` (from the period solved from) and
``K`` request streams of its own (payload ``rollout_streams``, ``(K, periods from t0)``, drawn by
the solver independently of the simulated customers, so the rule never sees the future). When a
request for product j arrives in period t with seats x (and j has its seats), the control runs the
base policy (offer a product iff its fare covers ``sum_i B[t', x'_i, i]``) on every stream from
period t + 1, once from ``x - A_j`` and once from ``x``, and offers j iff

.. math::

    f_j + \\frac1K \\sum_k R_k(x - A_j) \\ge \\frac1K \\sum_k R_k(x),

the one-step rollout rule of Bertsekas, Tsitsiklis & Wu (1997), "Rollout algorithms for
combinatorial optimization", Journal of Heuristics 3(3):245-262, with the base policy's value to
go estimated on common streams (both branches face the same customers, so their difference has
little noise). With the base policy's exact value to go the rollout policy earns at least as much
as the base policy (policy improvement); the sampled version keeps that up to its sampling error.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numba import njit

from rmkit.controls import register_control
from rmkit.controls.base import Control, owned, where
from rmkit.controls.table import BidPriceTableControl
from rmkit.errors import SolverError
from rmkit.kernels.replay import clears_bid_prices


class RolloutArrays(NamedTuple):
    t0: int
    table: np.ndarray  # float64 (periods from t0, capacity, legs)
    streams: np.ndarray  # int32 (K, periods from t0): product requested or -1
    z: float  # evidence needed to overturn the base decision, in standard errors


@njit(cache=True)
def _base_revenue(ctrl, s, start, x0, x, net):
    """Revenue of the base table policy on stream ``s`` from period ``start`` and seats ``x0``
    (``x`` is scratch space)."""
    fares, leg_ptr, leg_list = net
    n_left = ctrl.streams.shape[1]
    total = 0.0
    for i in range(x0.size):
        x[i] = x0[i]
    for row in range(start - ctrl.t0, n_left):
        c = ctrl.streams[s, row]
        if c < 0:
            continue
        bid = 0.0
        room = True
        for q in range(leg_ptr[c], leg_ptr[c + 1]):
            i = leg_list[q]
            if x[i] < 1:
                room = False
                break
            bid += ctrl.table[row, x[i], i]
        if room and clears_bid_prices(fares[c], bid):
            for q in range(leg_ptr[c], leg_ptr[c + 1]):
                x[leg_list[q]] -= 1
            total += fares[c]
    return total


def offers(ctrl, k, t, j, seats, memo, net):
    fares, leg_ptr, leg_list = net
    m = seats.shape[1]
    keep = np.empty(m, dtype=np.int64)
    sold = np.empty(m, dtype=np.int64)
    scratch = np.empty(m, dtype=np.int64)
    for i in range(m):
        keep[i] = seats[k, i]
        sold[i] = seats[k, i]
    bid = 0.0
    for q in range(leg_ptr[j], leg_ptr[j + 1]):
        i = leg_list[q]
        sold[i] -= 1
        bid += ctrl.table[t - ctrl.t0, keep[i], i]
    base = clears_bid_prices(fares[j], bid)
    n = ctrl.streams.shape[0]
    total = 0.0
    square = 0.0
    for s in range(n):
        d = (fares[j] + _base_revenue(ctrl, s, t + 1, sold, scratch, net)
             - _base_revenue(ctrl, s, t + 1, keep, scratch, net))
        total += d
        square += d * d
    mean = total / n
    spread = 0.0
    if n > 1:
        var = (square - n * mean * mean) / (n - 1)
        spread = ctrl.z * np.sqrt(max(var, 0.0) / n)
    if base:
        return mean + spread >= -1e-9 * fares[j]  # reject only on clear evidence
    return mean - spread > 1e-9 * fares[j]  # accept only on clear evidence


@register_control
class RolloutControl(Control):
    name = "rollout"
    description = ("offer a product when simulating the base bid-price table on from both "
                   "outcomes says accepting pays (one-step rollout)")
    arrays_type = RolloutArrays
    offers = staticmethod(offers)

    @classmethod
    def drives(cls, result) -> bool:
        return "bid_price_table" in result and "rollout_streams" in result.payload

    @classmethod
    def arrays(cls, result, network, capacity) -> RolloutArrays:
        cls.check_status(result)
        if not cls.drives(result):
            raise SolverError(f"{where(result)}: the result holds no bid-price table and rollout "
                              "streams; solve it with lr-rollout")
        t0, table = BidPriceTableControl.arrays(result, network, capacity)  # checked
        streams = owned(result.payload["rollout_streams"], np.int32)
        if streams.ndim != 2 or streams.shape[1] != table.shape[0] or streams.shape[0] < 1:
            raise SolverError(f"{where(result)}: rollout_streams must be (streams >= 1, "
                              f"{table.shape[0]} periods), got {streams.shape}")
        z = float(result.payload.get("rollout_z", 0.0))
        if not z >= 0.0:
            raise SolverError(f"{where(result)}: rollout_z must be a number >= 0, got {z!r}")
        return RolloutArrays(t0, table, streams, z)

    @classmethod
    def example_result(cls, network, demand, seed):
        from rmkit.results import SolveResult

        base = BidPriceTableControl.example_result(network, demand, seed)
        streams = demand.sample_arrivals(4, seed + 1).customer
        return SolveResult("example-rollout", network, demand.n_periods,
                           {"bid_price_table": base["bid_price_table"]},
                           payload={"rollout_streams": streams})
