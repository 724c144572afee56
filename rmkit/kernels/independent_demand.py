"""Kernel side of independent demand: a customer of type j asks for product j (see
:mod:`rmkit.model.independent`); she buys it when it is offered and nothing otherwise."""

from __future__ import annotations

from typing import NamedTuple

from rmkit.kernels.replay import offered, register_demand_kernel


class IndependentKernelData(NamedTuple):
    """Nothing to read: the customer type is the product index."""

    n_products: int


def choose(dem, ctrl, k, t, c, u, seats, memo, net):
    if offered(ctrl, k, t, c, seats, memo, net):
        return c
    return -1


register_demand_kernel(IndependentKernelData, choose)
