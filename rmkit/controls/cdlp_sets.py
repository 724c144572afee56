"""CDLP's primal as a policy: offer each set of the LP's solution for the periods it is given.

The result (``cdlp-sets``; :mod:`rmkit.methods.cdlp`) carries ``offer_sets`` and the set of each
period from the one solved from (``offer_schedule``, :func:`rmkit.methods.shared.cdlp.schedule`;
``len(offer_sets)`` means nothing is offered). Product j is offered in period t iff it belongs to
that period's set (and has its seats, which the simulator checks first). Re-solving recomputes
the schedule from the state (Liu & van Ryzin 2008, sec. 5; Bront et al. 2009, sec. 5).
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from rmkit.controls import register_control
from rmkit.controls.base import Control, owned, where
from rmkit.errors import SolverError


class OfferScheduleArrays(NamedTuple):
    t0: int
    schedule: np.ndarray  # int64 (periods from t0,): row of `bits` offered in each period
    bits: np.ndarray  # uint8 (sets + 1, ceil(n / 8)); the last row is the empty set


def offers(ctrl, k, t, j, seats, memo, net):
    row = ctrl.schedule[t - ctrl.t0]
    return (ctrl.bits[row, j >> 3] >> (j & 7)) & 1 == 1


def packed_sets(sets: np.ndarray, n_products: int) -> np.ndarray:
    """``(K + 1, ceil(n/8))`` uint8 bits of K bool sets, plus an empty last row."""
    rows = np.zeros((sets.shape[0] + 1, 8 * ((n_products + 7) // 8)), dtype=bool)
    rows[: sets.shape[0], :n_products] = sets
    return np.packbits(rows, axis=1, bitorder="little")


@register_control
class OfferScheduleControl(Control):
    name = "cdlp_sets"
    description = "offer each CDLP set for the periods the LP gives it, one after the other"
    arrays_type = OfferScheduleArrays
    offers = staticmethod(offers)

    @classmethod
    def drives(cls, result) -> bool:
        return "offer_schedule" in result.payload and "offer_sets" in result.payload

    @classmethod
    def arrays(cls, result, network, capacity) -> OfferScheduleArrays:
        cls.check_status(result)
        if not cls.drives(result):
            raise SolverError(f"{where(result)}: the result holds no offer schedule; solve it "
                              "with cdlp-sets")
        sets = np.asarray(result.payload["offer_sets"], dtype=bool).reshape(
            -1, network.n_products)
        schedule = owned(result.payload["offer_schedule"], np.int64)
        if schedule.shape != (result.n_periods - result.period,) or (
                schedule.size and (schedule.min() < 0 or schedule.max() > sets.shape[0])):
            raise SolverError(f"{where(result)}: the offer schedule does not cover the periods "
                              "from the one solved from with the sets given")
        return OfferScheduleArrays(int(result.period), schedule,
                                   packed_sets(sets, network.n_products))

    @classmethod
    def example_result(cls, network, demand, seed):
        from rmkit.results import SolveResult

        rng = np.random.default_rng(seed)
        sets = rng.random((3, network.n_products)) < 0.6
        schedule = np.sort(rng.integers(0, 4, size=demand.n_periods))
        return SolveResult("example-cdlp-sets", network, demand.n_periods, {},
                           payload={"offer_sets": sets, "offer_schedule": schedule})
