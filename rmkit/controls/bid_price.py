"""Static bid prices: offer product j iff its fare covers the sum of its legs' bid prices.

``f_j >= sum_{i in j} pi_i`` (Talluri & van Ryzin 2004, section 3.2; ties accept, with the
rounding slack of :data:`rmkit.kernels.replay.ACCEPT_TOLERANCE`).
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from rmkit.controls import register_control
from rmkit.controls.base import Control, owned, scaled_variables, where
from rmkit.errors import SolverError
from rmkit.kernels.replay import clears_bid_prices


class BidPriceArrays(NamedTuple):
    bid: np.ndarray  # float64 (legs,)


def offers(ctrl, k, t, j, seats, memo, net):
    fares, leg_ptr, leg_list = net
    s = 0.0
    for q in range(leg_ptr[j], leg_ptr[j + 1]):
        s += ctrl.bid[leg_list[q]]
    return clears_bid_prices(fares[j], s)


@register_control
class BidPriceControl(Control):
    name = "bid_price"
    description = "offer a product when its fare covers its legs' static bid prices"
    arrays_type = BidPriceArrays
    sale_sensitive = True
    scalable = True
    offers = staticmethod(offers)

    @classmethod
    def drives(cls, result) -> bool:
        return "bid_price" in result

    @classmethod
    def arrays(cls, result, network, capacity) -> BidPriceArrays:
        cls.check_status(result)
        bid = owned(result["bid_price"], np.float64)
        if np.isnan(bid).any():
            raise SolverError(f"{where(result)}: bid prices contain NaN; the solve did not "
                              "produce prices")
        return BidPriceArrays(bid)

    @classmethod
    def scaled(cls, result, multiplier):
        return scaled_variables(result, ("bid_price",), multiplier)

    @classmethod
    def example_result(cls, network, demand, seed):
        from rmkit.results import SolveResult

        rng = np.random.default_rng(seed)
        bid = rng.uniform(0.0, 0.8, network.n_legs) * float(network.fares.max())
        return SolveResult("example-bid-price", network, demand.n_periods, {"bid_price": bid})
