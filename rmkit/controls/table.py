"""Bid prices by period and seats left: offer j iff ``f_j >= sum_{i in j} B[t, x_i, i]``.

``B`` is a result's ``bid_price_table`` (conventions of :mod:`rmkit.results`); the table already
depends on the seats left, so recomputing it after a sale changes nothing.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from rmkit.controls import register_control
from rmkit.controls.base import Control, read_only, scaled_variables, where
from rmkit.errors import SolverError
from rmkit.kernels.replay import clears_bid_prices


class TableArrays(NamedTuple):
    t0: int
    table: np.ndarray  # float64 (periods from t0, capacity, legs)


def offers(ctrl, k, t, j, seats, memo, net):
    fares, leg_ptr, leg_list = net
    row = t - ctrl.t0
    s = 0.0
    for q in range(leg_ptr[j], leg_ptr[j + 1]):
        i = leg_list[q]
        s += ctrl.table[row, seats[k, i], i]
    return clears_bid_prices(fares[j], s)


@register_control
class BidPriceTableControl(Control):
    name = "table"
    description = "offer a product when its fare covers its legs' bid prices by period and seats left"
    arrays_type = TableArrays
    scalable = True
    offers = staticmethod(offers)

    @classmethod
    def drives(cls, result) -> bool:
        return "bid_price_table" in result

    @classmethod
    def arrays(cls, result, network, capacity) -> TableArrays:
        cls.check_status(result)
        table = read_only(result["bid_price_table"], np.float64)
        for i in range(network.n_legs):  # every entry the control can look at must be a number
            if np.isnan(table[:, 1 : int(capacity[i]) + 1, i]).any():
                raise SolverError(
                    f"{where(result)}: bid_price_table has NaN for leg {network.legs[i].id!r} "
                    "within its seats left; the table cannot steer sales"
                )
        return TableArrays(int(result.period), table)

    @classmethod
    def scaled(cls, result, multiplier):
        return scaled_variables(result, ("bid_price", "bid_price_table"), multiplier)

    @classmethod
    def example_result(cls, network, demand, seed):
        from rmkit.results import SolveResult

        rng = np.random.default_rng(seed)
        t, width, m = demand.n_periods, network.max_capacity + 1, network.n_legs
        # decreasing in seats left, as a value of the x-th seat is
        seat = np.sort(rng.uniform(0, float(network.fares.max()), (t, width, m)), axis=1)[:, ::-1]
        table = np.where(np.arange(width)[None, :, None] <= network.capacities[None, None, :],
                         seat, np.nan)
        table[:, 0, :] = np.inf
        return SolveResult("example-table", network, demand.n_periods,
                           {"bid_price_table": table})
