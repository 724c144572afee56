"""The set-maximising rule: offer the set that maximises expected revenue net of bid prices.

In period t with seats left x the control offers the S that maximises

    sum_j P_tj(S) (f_j - sum_{i in j} B[t, x_i, i])

over sets of products with seats (Liu & van Ryzin 2008, sec. 4; Bront et al. 2009, sec. 5),
``B`` being a result's ``bid_price_table``. The search runs inside the simulator's kernel on
the offer-set tables the result carries (``payload["offer_tables"]``,
:mod:`rmkit.methods.shared.offer_sets`): only the component of the product asked about is
searched, among its products with a non-negative net fare (ties accept, with the rounding slack
of :data:`rmkit.kernels.replay.ACCEPT_TOLERANCE`). With one segment per product this is the
``table`` rule.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from rmkit.controls import register_control
from rmkit.controls.base import Control, owned, scaled_variables, where
from rmkit.errors import SolverError
from rmkit.kernels.offer_sets import best_subset
from rmkit.kernels.replay import clears_bid_prices, seats_free


class SetMaxArrays(NamedTuple):
    t0: int
    table: np.ndarray  # float64 (periods from t0, capacity, legs)
    comp_ptr: np.ndarray
    comp_product: np.ndarray
    set_ptr: np.ndarray
    prob: np.ndarray  # (epochs, sum of 2**n_c n_c)
    epoch: np.ndarray  # (periods from t0,)
    product_comp: np.ndarray
    product_pos: np.ndarray
    gain: np.ndarray  # scratch (widest component,)
    val: np.ndarray  # scratch (2**widest,)


def offers(ctrl, k, t, j, seats, memo, net):
    c = ctrl.product_comp[j]
    if c < 0:
        return False
    fares, leg_ptr, leg_list = net
    row = t - ctrl.t0
    lo = ctrl.comp_ptr[c]
    nc = ctrl.comp_ptr[c + 1] - lo
    allowed = 0
    for q in range(nc):
        jj = ctrl.comp_product[lo + q]
        ctrl.gain[q] = 0.0
        if not seats_free(seats, k, leg_list, leg_ptr[jj], leg_ptr[jj + 1]):
            continue
        s = 0.0
        for p in range(leg_ptr[jj], leg_ptr[jj + 1]):
            i = leg_list[p]
            s += ctrl.table[row, seats[k, i], i]
        if clears_bid_prices(fares[jj], s):
            ctrl.gain[q] = max(fares[jj] - s, 0.0)
            allowed |= 1 << q
    if allowed == 0:
        return False
    sub = best_subset(ctrl.prob[ctrl.epoch[row]], ctrl.set_ptr[c], nc, ctrl.gain, allowed,
                      ctrl.val)
    return (sub >> ctrl.product_pos[j]) & 1 == 1


@register_control
class SetMaxControl(Control):
    name = "set_max"
    description = "offer the set maximising expected revenue net of a bid-price table"
    arrays_type = SetMaxArrays
    scalable = True
    offers = staticmethod(offers)

    @classmethod
    def drives(cls, result) -> bool:
        return "bid_price_table" in result and "offer_tables" in result.payload

    @classmethod
    def arrays(cls, result, network, capacity) -> SetMaxArrays:
        cls.check_status(result)
        if not cls.drives(result):
            raise SolverError(f"{where(result)}: the set-maximising rule needs a bid-price table "
                              "and the offer-set tables of a choice method (cdpd)")
        table = owned(result["bid_price_table"], np.float64)
        for i in range(network.n_legs):
            if np.isnan(table[:, 1 : int(capacity[i]) + 1, i]).any():
                raise SolverError(f"{where(result)}: bid_price_table has NaN for leg "
                                  f"{network.legs[i].id!r} within its seats left")
        sets = result.payload["offer_tables"]
        widest = int(np.diff(sets.comp_ptr).max(initial=1))
        return SetMaxArrays(
            int(result.period), table, owned(sets.comp_ptr, np.int64),
            owned(sets.comp_product, np.int64), owned(sets.set_ptr, np.int64),
            owned(sets.prob, np.float64), owned(sets.epoch, np.int64),
            owned(sets.product_comp, np.int64), owned(sets.product_pos, np.int64),
            np.zeros(max(widest, 1)), np.zeros(2**widest))

    @classmethod
    def scaled(cls, result, multiplier):
        return scaled_variables(result, ("bid_price", "bid_price_table"), multiplier)

    @classmethod
    def example_result(cls, network, demand, seed):
        import dataclasses

        from rmkit.controls import get_control
        from rmkit.methods.shared.offer_sets import offer_sets
        from rmkit.model.choice import ChoiceDemand

        base = get_control("table").example_result(network, demand, seed)
        if not isinstance(demand, ChoiceDemand):
            demand = ChoiceDemand.independent_equivalent(demand.sale_probabilities())
        return dataclasses.replace(base, method="example-set-max",
                                   payload={"offer_tables": offer_sets(demand)})
