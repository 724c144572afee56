"""Stored decisions for every period and state (the exact DP's policy), replayed as they are.

Product j is offered in period t at seats left x iff bit ``j % 8`` of
``bits[t - t0, s, j // 8]`` is set, ``s = sum_i x_i * stride_i`` (a result's
:class:`~rmkit.results.StatePolicy`). The decisions already cover every state, so the policy is
solved once and never re-solved.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from rmkit.controls import register_control
from rmkit.controls.base import Control, owned, where
from rmkit.errors import SolverError
from rmkit.kernels.replay import flat_state


class DecisionArrays(NamedTuple):
    t0: int
    bits: np.ndarray  # uint8 (periods from t0, states, ceil(n / 8))
    strides: np.ndarray  # int64 (legs,)


def offers(ctrl, k, t, j, seats, memo, net):
    s = flat_state(seats, k, ctrl.strides)
    return (ctrl.bits[t - ctrl.t0, s, j >> 3] >> (j & 7)) & 1 == 1


@register_control
class StoredDecisions(Control):
    name = "decisions"
    description = "the decisions stored for every period and state (the exact DP's policy)"
    arrays_type = DecisionArrays
    adaptive = False
    offers = staticmethod(offers)

    @classmethod
    def drives(cls, result) -> bool:
        return result.policy is not None and result.policy.bits.shape[0] > 0

    @classmethod
    def arrays(cls, result, network, capacity) -> DecisionArrays:
        cls.check_status(result)
        policy = result.policy
        if not cls.drives(result):
            raise SolverError(f"{where(result)}: the result stores no decisions (keep_decisions "
                              "off?); solve it with its decisions to replay them")
        m, n = network.n_legs, network.n_products
        expected = (result.n_periods - policy.t0, network.state_space_size, (n + 7) // 8)
        if policy.bits.shape != expected or policy.strides.shape != (m,):
            raise SolverError(
                f"{where(result)}: the stored decisions have shape {policy.bits.shape} "
                f"(expected {expected}) and strides {policy.strides.shape} (expected ({m},))"
            )
        return DecisionArrays(int(policy.t0), owned(policy.bits, np.uint8),
                              owned(policy.strides, np.int64))

    @classmethod
    def example_result(cls, network, demand, seed):
        from rmkit.results import SolveResult, StatePolicy

        rng = np.random.default_rng(seed)
        n = network.n_products
        shape = (demand.n_periods, network.state_space_size, (n + 7) // 8)
        bits = rng.integers(0, 256, size=shape, dtype=np.uint8)
        from rmkit.model.network import grid_strides

        strides = grid_strides(network.capacities)
        return SolveResult("example-decisions", network, demand.n_periods, {},
                           policy=StatePolicy(bits, strides))
