"""The single-leg dynamic program, for one leg or for every leg of a network at once.

Model (Lee & Hersh 1993, "A model for dynamic airline seat inventory control with multiple seat
bookings", Transportation Science 27(3):252-265; Talluri & van Ryzin 2004, "The Theory and
Practice of Revenue Management", section 2.5.1). One leg with C seats, periods ``t = 0 .. T-1``;
in period t at most one request arrives, for product j with probability ``p[t, j]``, paying
``f[t, j]`` (fares may change from period to period; a fare ``<= 0`` is never accepted).
With ``V_T(x) = 0`` and ``V_t(0) = 0``::

    V_t(x) = V_{t+1}(x) + sum_j p[t, j] * max(0, f[t, j] - dV_{t+1}(x)),
    dV_{t+1}(x) = V_{t+1}(x) - V_{t+1}(x - 1)   (the value of the x-th seat).

A request for j in period t with x seats left is accepted iff ``f[t, j] >= dV_{t+1}(x)``
(ties accept). Because ``dV_{t+1}(x)`` does not increase with x (Talluri & van Ryzin 2004,
section 2.5.1, the concavity result), the optimal policy is nested: product j is sold in period t
while more than ``y[t, j]`` seats are left, where the *protection level against j* is

    y[t, j] = #{x in 1..C : dV_{t+1}(x) > f[t, j]},

the seats held back for products worth more than j. Sorting the products by fare, ``y`` against
the (k+1)-th highest fare is the nested protection level of the k highest classes.

>>> import numpy as np
>>> dp = single_leg_dp(np.array([[0.3]]), np.array([[10.0]]), capacity=1)
>>> float(dp.value)
3.0
>>> dp.protection_level.tolist()
[[0]]

Leg tables of the decomposition methods (``dpd``, ``lr``)
--------------------------------------------------------
Both methods solve one single-leg dynamic program per leg (Talluri & van Ryzin 2004, section
3.4) with per-period leg fares ``r[i, t, j]`` (zero where product j does not use leg i), using
:func:`rmkit.kernels.single_leg.leg_values_batch`. From the leg values ``v_i(t, x)`` this module
builds the result tables of :data:`rmkit.results.SCHEMA`:

* ``leg_value[t, x, i] = v_i(t, x)``, the value to go at the start of period t;
* ``bid_price_table[t, x, i] = v_i(t+1, x) - v_i(t+1, x-1)``, the value of the x-th seat for a
  request in period t; ``+inf`` at x = 0, NaN above the leg's capacity.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rmkit.errors import InputError
from rmkit.model.network import Network, padded_rows


def _as_table(a: np.ndarray, name: str) -> np.ndarray:
    arr = np.asarray(a, dtype=np.float64)
    if arr.ndim != 2:
        raise InputError(f"{name}: must be a (periods x products) table, got shape {arr.shape}")
    if not np.all(np.isfinite(arr)):
        t, j = (int(v) for v in np.argwhere(~np.isfinite(arr))[0])
        raise InputError(f"{name}[period {t}, product {j}]: must be finite, got {arr[t, j]!r}")
    return np.ascontiguousarray(arr)


def _check_capacity(capacity: object, name: str = "capacity") -> int:
    if isinstance(capacity, bool) or not isinstance(capacity, (int, np.integer)) or capacity < 0:
        raise InputError(f"{name}: must be a whole number >= 0, got {capacity!r}")
    return int(capacity)


def _check_prob(prob: np.ndarray, name: str = "prob") -> None:
    bad = np.argwhere((prob < 0) | (prob > 1))
    if bad.size:
        t, j = (int(v) for v in bad[0])
        raise InputError(f"{name}[period {t}, product {j}]: must be in [0, 1], got {prob[t, j]!r}")
    sums = prob.sum(axis=1)
    if np.any(sums > 1 + 1e-9):
        t = int(np.argmax(sums))
        raise InputError(
            f"{name}[period {t}]: probabilities sum to {sums[t]:.6g} > 1; at most one request "
            "arrives per period"
        )


def broadcast_fares(fares: np.ndarray, n_periods: int, name: str = "fares") -> np.ndarray:
    """A ``(T, n)`` fare table from per-product fares ``(n,)`` or a per-period table ``(T, n)``."""
    f = np.asarray(fares, dtype=np.float64)
    if f.ndim == 1:
        f = np.broadcast_to(f, (n_periods, f.size))
    return _as_table(f, name)


@dataclass(frozen=True, eq=False)
class SingleLegDP:
    """The solved single-leg DP.

    Attributes
    ----------
    values
        ``(T+1, C+1)``: ``values[t, x]`` = V_t(x), the expected revenue to go at the start of
        period t with x seats left (row T is zero).
    fares
        ``(T, n)`` fares used (per period).
    """

    values: np.ndarray
    fares: np.ndarray

    @property
    def n_periods(self) -> int:
        return self.values.shape[0] - 1

    @property
    def capacity(self) -> int:
        return self.values.shape[1] - 1

    @property
    def value(self) -> float:
        """V_0(C): the optimal expected revenue from full capacity."""
        return float(self.values[0, -1])

    @property
    def seat_values(self) -> np.ndarray:
        """``(T+1, C+1)``: ``[t, x]`` = V_t(x) - V_t(x-1), the value of the x-th seat; +inf at x=0."""
        out = np.empty_like(self.values)
        out[:, 0] = np.inf
        np.subtract(self.values[:, 1:], self.values[:, :-1], out=out[:, 1:])
        return out

    @property
    def bid_prices(self) -> np.ndarray:
        """``(T, C+1)``: bid price for a request in period t with x seats left, dV_{t+1}(x).

        The ``bid_price_table`` convention of :mod:`rmkit.results`: +inf at x = 0.
        """
        return self.seat_values[1:]

    @property
    def protection_level(self) -> np.ndarray:
        """``(T, n)`` int: seats protected against product j in period t (see module docstring).

        Product j is accepted in period t with x seats left iff ``x > protection_level[t, j]``.
        """
        dv = self.seat_values[1:, 1:]  # (T, C): dV_{t+1}(x) for x = 1..C
        return (dv[:, None, :] > self.fares[:, :, None]).sum(axis=2).astype(np.int64)

    def accept(self, period: int, seats: int) -> np.ndarray:
        """``(n,)`` bool: which products the optimal policy sells in ``period`` with ``seats`` left."""
        if seats <= 0:
            return np.zeros(self.fares.shape[1], dtype=bool)
        bid = self.values[period + 1, seats] - self.values[period + 1, seats - 1]
        return (self.fares[period] > 0) & (self.fares[period] >= bid)


def single_leg_dp(prob: np.ndarray, fares: np.ndarray, capacity: int) -> SingleLegDP:
    """Solve the single-leg DP for every period and every capacity 0..``capacity``.

    Parameters
    ----------
    prob
        ``(T, n)`` request probabilities (row sums at most 1).
    fares
        ``(n,)`` fares, or ``(T, n)`` fares per period; a fare ``<= 0`` is never accepted.
    capacity
        Seats on the leg.
    """
    from rmkit.kernels.single_leg import single_leg_values

    p = _as_table(prob, "prob")
    _check_prob(p)
    f = broadcast_fares(fares, p.shape[0])
    if f.shape != p.shape:
        raise InputError(f"fares: shape {f.shape} must match prob {p.shape} (periods x products)")
    c = _check_capacity(capacity)
    values = np.empty((p.shape[0] + 1, c + 1))
    single_leg_values(p, f, c, values)
    values.setflags(write=False)
    f = f.copy()
    f.setflags(write=False)
    return SingleLegDP(values=values, fares=f)


def leg_values(prob: np.ndarray, fares: np.ndarray, capacities: np.ndarray) -> np.ndarray:
    """Value tables of many legs at once: ``(L, T+1, max(capacities)+1)``, NaN past each capacity.

    ``prob`` is ``(T, n)`` shared by all legs; ``fares`` is ``(L, T, n)`` (or ``(L, n)``, the same
    in every period), ``<= 0`` where a product is never accepted on a leg; ``capacities`` ``(L,)``.
    The legs are solved in parallel.
    """
    from rmkit.kernels.single_leg import leg_values_batch

    p = _as_table(prob, "prob")
    _check_prob(p)
    f = np.asarray(fares, dtype=np.float64)
    if f.ndim == 2:
        f = np.broadcast_to(f[:, None, :], (f.shape[0], p.shape[0], f.shape[1]))
    if f.ndim != 3 or f.shape[1:] != p.shape:
        raise InputError(f"fares: needs shape (legs, {p.shape[0]}, {p.shape[1]}), got {f.shape}")
    if not np.all(np.isfinite(f)):
        raise InputError("fares: every fare must be finite")
    caps = np.asarray(capacities)
    if caps.shape != (f.shape[0],) or not np.issubdtype(caps.dtype, np.integer) or np.any(caps < 0):
        raise InputError(
            f"capacities: needs {f.shape[0]} whole numbers >= 0, got {np.asarray(capacities)!r}"
        )
    caps = caps.astype(np.int64)
    out = np.empty((f.shape[0], p.shape[0] + 1, int(caps.max(initial=0)) + 1))
    leg_values_batch(p, np.ascontiguousarray(f), caps, out)
    return out


def product_legs(network: Network) -> np.ndarray:
    """``(n_products, k_max)`` int64: the legs of each product, padded with -1."""
    return padded_rows(network.incidence.T)


def leg_products(network: Network) -> np.ndarray:
    """``(n_legs, k_max)`` int64: the products using each leg, ascending, padded with -1."""
    return padded_rows(network.incidence)


def network_leg_values(prob: np.ndarray, fares: np.ndarray, network: Network) -> np.ndarray:
    """``(L, T+1, cmax+1)`` values of every leg of ``network`` for per-leg fares ``(L, T, n)``.

    The inner loop of the decomposition methods: their inputs come from validated models, so
    unlike :func:`leg_values` nothing is checked here.
    """
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
    """``(leg_value, bid_price_table)``, both ``(T, cmax+1, L)``, from ``(L, T+1, cmax+1)``
    values."""
    later = values[:, 1:, :]
    table = np.empty(later.shape)
    with np.errstate(invalid="ignore"):
        np.subtract(later[:, :, 1:], later[:, :, :-1], out=table[:, :, 1:])
    table[:, :, 0] = np.inf
    return (np.ascontiguousarray(values[:, :-1, :].transpose(1, 2, 0)),
            np.ascontiguousarray(table.transpose(1, 2, 0)))


def bid_prices_at(table: np.ndarray, capacity: np.ndarray) -> np.ndarray:
    """Bid prices for a request in the table's first period with ``capacity`` seats left."""
    return table[0, capacity, np.arange(capacity.size)]
