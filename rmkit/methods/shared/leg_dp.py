"""Shared pieces of the decomposition methods (``dpd``, ``lr``): leg layouts and leg tables.

Both methods solve one single-leg dynamic program per leg (Talluri & van Ryzin 2004, section
3.4) with per-period leg fares ``r[i, t, j]`` (zero where product j does not use leg i), using
:func:`rmkit.kernels.single_leg.leg_values_batch`. From the leg values ``v_i(t, x)`` this module
builds the result tables of :data:`rmkit.results.SCHEMA`:

* ``leg_value[t, x, i] = v_i(t, x)``, the value to go at the start of period t;
* ``bid_price_table[t, x, i] = v_i(t+1, x) - v_i(t+1, x-1)``, the value of the x-th seat for a
  request in period t; ``+inf`` at x = 0, NaN above the leg's capacity.
"""

from __future__ import annotations

import numpy as np

from rmkit.model.network import Network


def product_legs(network: Network) -> np.ndarray:
    """``(n_products, k_max)`` int64: the legs of each product, padded with -1."""
    a = network.incidence
    k_max = int(a.sum(axis=0).max())
    out = np.full((network.n_products, k_max), -1, dtype=np.int64)
    for j in range(network.n_products):
        legs = np.flatnonzero(a[:, j])
        out[j, : legs.size] = legs
    return out


def leg_values(prob: np.ndarray, fares: np.ndarray, network: Network) -> np.ndarray:
    """``(L, T+1, cmax+1)`` leg values for per-leg fares ``fares`` ``(L, T, n)``; NaN above cap."""
    from rmkit.kernels.single_leg import leg_values_batch

    values = np.empty((network.n_legs, prob.shape[0] + 1, network.max_capacity + 1))
    leg_values_batch(
        np.ascontiguousarray(prob), np.ascontiguousarray(fares),
        np.ascontiguousarray(network.capacities), values,
    )
    return values


def value_at(values: np.ndarray, capacity: np.ndarray) -> np.ndarray:
    """Each leg's value to go at the first period with ``capacity`` seats left."""
    return values[np.arange(values.shape[0]), 0, capacity]


def leg_tables(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(leg_value, bid_price_table)``, both ``(T, cmax+1, L)``, from ``(L, T+1, cmax+1)`` values."""
    leg_value = np.ascontiguousarray(values[:, :-1, :].transpose(1, 2, 0))
    later = values[:, 1:, :]
    table = np.empty_like(leg_value)
    with np.errstate(invalid="ignore"):
        table[:, 1:, :] = (later[:, :, 1:] - later[:, :, :-1]).transpose(1, 2, 0)
    table[:, 0, :] = np.inf
    return leg_value, table


def bid_prices_at(table: np.ndarray, capacity: np.ndarray) -> np.ndarray:
    """Bid prices for a request in the table's first period with ``capacity`` seats left."""
    return table[0, capacity, np.arange(capacity.size)]
