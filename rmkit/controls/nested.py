"""Nested booking limits per leg: offer j iff its bucket has room on every leg it uses.

On leg i with bucket ``b = bucket[i, j]`` (-1: closed), j is open iff
``sum_{b' >= b} sold[i, b'] + 1 <= limit[i, b]``, counting the sales made since the limits were
set (Talluri & van Ryzin 2004, section 2.1.1: nested limits, bucket 0 the highest). The sales
counts are the control's per-path memory (``memo[k, i * buckets + b]``); a re-solve sets new
limits and restarts them.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from rmkit.controls import register_control
from rmkit.controls.base import Control, owned, where
from rmkit.errors import SolverError


class NestedArrays(NamedTuple):
    limit: np.ndarray  # float64 (legs, buckets)
    bucket: np.ndarray  # int64 (legs, products)


def offers(ctrl, k, t, j, seats, memo, net):
    fares, leg_ptr, leg_list = net
    n_buckets = ctrl.limit.shape[1]
    for q in range(leg_ptr[j], leg_ptr[j + 1]):
        i = leg_list[q]
        b = ctrl.bucket[i, j]
        if b < 0:
            return False
        taken = 0
        for bb in range(b, n_buckets):
            taken += memo[k, i * n_buckets + bb]
        if taken + 1 > ctrl.limit[i, b]:
            return False
    return True


def on_sale(ctrl, k, j, memo, net):
    fares, leg_ptr, leg_list = net
    n_buckets = ctrl.limit.shape[1]
    for q in range(leg_ptr[j], leg_ptr[j + 1]):
        i = leg_list[q]
        memo[k, i * n_buckets + ctrl.bucket[i, j]] += 1


@register_control
class NestedLimitControl(Control):
    name = "nested"
    description = "nested booking limits by bucket on each leg"
    arrays_type = NestedArrays
    sale_sensitive = True
    memory = True
    offers = staticmethod(offers)
    on_sale = staticmethod(on_sale)

    @classmethod
    def drives(cls, result) -> bool:
        return "booking_limit" in result and "product_bucket" in result

    @classmethod
    def arrays(cls, result, network, capacity) -> NestedArrays:
        cls.check_status(result)
        limit = owned(result["booking_limit"], np.float64)
        bucket = owned(result["product_bucket"], np.int64)
        m, n = network.n_legs, network.n_products
        n_buckets = limit.shape[1]
        if bucket.shape != (m, n) or bucket.min() < -1 or bucket.max() >= n_buckets:
            raise SolverError(
                f"{where(result)}: bucket must be (leg, product) indices in [-1, "
                f"{n_buckets - 1}], got shape {bucket.shape} with values in "
                f"[{bucket.min()}, {bucket.max()}]"
            )
        if np.isnan(limit).any():
            raise SolverError(f"{where(result)}: booking_limit contains NaN")
        return NestedArrays(limit, bucket)

    @classmethod
    def memory_width(cls, arrays: NestedArrays) -> int:
        return int(arrays.limit.size)  # sales by (leg, bucket), leg-major

    @classmethod
    def example_result(cls, network, demand, seed):
        from rmkit.results import SolveResult

        rng = np.random.default_rng(seed)
        m, n = network.n_legs, network.n_products
        order = np.argsort(-network.fares, kind="stable")
        rank = np.empty(n, dtype=np.int64)
        rank[order] = np.arange(n)
        bucket = np.where(network.incidence > 0, np.minimum(rank, 2)[None, :], -1)
        caps = network.capacities.astype(np.float64)
        share = np.sort(rng.uniform(0.2, 1.0, (m, 3)), axis=1)[:, ::-1]
        limit = np.floor(caps[:, None] * share)
        limit[:, 0] = caps
        return SolveResult("example-nested", network, demand.n_periods,
                           {"booking_limit": limit, "product_bucket": bucket})
