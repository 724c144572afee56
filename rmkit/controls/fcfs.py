"""First come, first served: every product is on offer while each leg it uses has a seat.

The floor every control must beat; it needs no solve.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from rmkit.controls import register_control
from rmkit.controls.base import Control


class FcfsArrays(NamedTuple):
    unused: int


def offers(ctrl, k, t, j, seats, memo, net):
    return True


@register_control
class FirstComeFirstServed(Control):
    name = "fcfs"
    description = "every product with seats on its legs is offered"
    arrays_type = FcfsArrays
    adaptive = False
    needs_result = False
    offers = staticmethod(offers)

    @classmethod
    def drives(cls, result) -> bool:
        return False

    @classmethod
    def arrays(cls, result, network, capacity) -> FcfsArrays:
        return FcfsArrays(0)

    @classmethod
    def fixed_offer(cls, arrays, network) -> np.ndarray:
        return np.ones(network.n_products, dtype=bool)

    @classmethod
    def example_result(cls, network, demand, seed):
        return None
