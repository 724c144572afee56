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
from rmkit.kernels.replay import ACCEPT_TOLERANCE, clears_bid_prices
from rmkit.model.network import padded_rows


class BidPriceArrays(NamedTuple):
    bid: np.ndarray  # float64 (legs,)
    product_bid: np.ndarray  # float64 (products,): the sum over each product's legs


def offers(ctrl, k, t, j, seats, memo, net):
    # straight-line on purpose: a loop over the legs here costs the compiled replay a
    # reference count per array (numba does not prune them once inlined), 5-10x its speed
    return clears_bid_prices(net[0][j], ctrl.product_bid[j])


def product_sums(bid: np.ndarray, network) -> np.ndarray:
    """``sum_{i in j} bid_i`` for each product, added leg by leg in ascending leg order (the
    order of the simulator's leg lists, so the sums are those a loop in the kernel would make):
    column w of the padded leg lists adds each product's w-th leg, or 0.0 past its last."""
    legs = padded_rows(network.incidence.T)
    priced = np.append(np.asarray(bid, dtype=np.float64), 0.0)  # the pad -1 reads this 0.0
    out = np.zeros(network.n_products)
    for w in range(legs.shape[1]):
        out += priced[legs[:, w]]
    return out


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
        return BidPriceArrays(bid, product_sums(bid, network))

    @classmethod
    def fixed_offer(cls, arrays, network) -> np.ndarray:
        fares = np.asarray(network.fares, dtype=np.float64)  # the rule of clears_bid_prices
        return fares >= arrays.product_bid - ACCEPT_TOLERANCE * fares

    @classmethod
    def scaled(cls, result, multiplier):
        return scaled_variables(result, ("bid_price",), multiplier)

    @classmethod
    def example_result(cls, network, demand, seed):
        from rmkit.results import SolveResult

        rng = np.random.default_rng(seed)
        bid = rng.uniform(0.0, 0.8, network.n_legs) * float(network.fares.max())
        return SolveResult("example-bid-price", network, demand.n_periods, {"bid_price": bid})
