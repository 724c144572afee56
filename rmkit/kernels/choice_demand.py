"""Kernel side of choice demand (see :mod:`rmkit.model.choice`): an arriving customer of segment
c walks the products she considers in their fixed order, asks :func:`offered` about each, and
picks by her purchase number u against the MNL shares of the offered ones (no purchase last).

The offered products are remembered as bits of one integer (at most 64 considered products), so
the loop allocates nothing. With ``v_0 = 0`` she buys whenever something she considers is open:
``u * total`` can round up to ``total`` itself, and then the last offered product is hers.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from rmkit.kernels.replay import offered, register_demand_kernel


class ChoiceKernelData(NamedTuple):
    seg_ptr: np.ndarray  # int64 (L + 1,)
    seg_product: np.ndarray  # int64: products segment l considers, seg_ptr[l] .. seg_ptr[l+1]
    seg_weight: np.ndarray  # float64: their MNL weights
    no_purchase: np.ndarray  # float64 (L,)


def choose(dem, ctrl, k, t, c, u, seats, memo, net):
    lo = dem.seg_ptr[c]
    hi = dem.seg_ptr[c + 1]
    mask = 0
    open_weight = 0.0
    for q in range(lo, hi):
        if offered(ctrl, k, t, dem.seg_product[q], seats, memo, net):
            mask |= 1 << (q - lo)
            open_weight += dem.seg_weight[q]
    if mask == 0:
        return -1
    target = u * (open_weight + dem.no_purchase[c])
    cum = 0.0
    last = -1
    for q in range(lo, hi):
        if (mask >> (q - lo)) & 1:
            cum += dem.seg_weight[q]
            last = dem.seg_product[q]
            if target < cum:
                return last
    if dem.no_purchase[c] == 0.0:
        return last
    return -1


register_demand_kernel(ChoiceKernelData, choose)
