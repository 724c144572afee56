"""Bid prices by period from one solve: offer j iff ``f_j >= sum_{i in j} B[t, x_i, i]``, with
the table solved once at the start and kept for the whole horizon (not re-solved).

This is the policy of the affine ALP (Adelman 2007, "Dynamic bid prices in revenue
management"): its time-dependent bid prices ``v_{t+1}`` come from one solve and already cover
every period. Re-solving the ALP from each simulated state is a different, far costlier policy
(one LP per state; on the bundled example 5 re-solves over 2,000 paths took about 20 minutes),
and its LP is degenerate, so the re-solved prices also depend on which optimal vertex the
solver lands on.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from rmkit.controls import register_control
from rmkit.controls.table import BidPriceTableControl
from rmkit.controls.table import offers as table_offers


class PeriodTableArrays(NamedTuple):
    t0: int
    table: np.ndarray  # float64 (periods from t0, capacity, legs)


@register_control
class PeriodBidPriceControl(BidPriceTableControl):
    name = "period_table"
    description = ("offer a product when its fare covers its legs' bid prices by period, from "
                   "one solve for the whole horizon (not re-solved)")
    arrays_type = PeriodTableArrays
    adaptive = False
    offers = staticmethod(table_offers)

    @classmethod
    def arrays(cls, result, network, capacity) -> PeriodTableArrays:
        return PeriodTableArrays(*BidPriceTableControl.arrays(result, network, capacity))
