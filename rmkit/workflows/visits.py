"""Where the optimal policy goes, and how far a method's bid prices are from the exact ones there.

The states the optimal policy visits (:func:`policy_visits`), the bid prices a method quotes at
them (:func:`quoted_bid_prices`), the visit-weighted errors against the exact marginal values
(:func:`visit_weighted_errors`; definitions in :mod:`rmkit.workflows.compare`) and the exact bid
prices averaged by period and a leg's seats left (:func:`exact_bid_price_table`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from rmkit.errors import SolverError
from rmkit.model.demand import Arrivals, DemandModel
from rmkit.model.network import Network
from rmkit.results import SolveResult

#: Fewest visits of a (period, seats left on a leg) cell for the exact table to show a value.
MIN_TABLE_VISITS = 5


@dataclass(frozen=True)
class Visits:
    """Distinct (period, state) pairs the optimal policy visits, with their visit shares."""

    period: np.ndarray  # (K,) int64
    state: np.ndarray  # (K, m) int64
    weight: np.ndarray  # (K,) float64, sums to 1
    n_paths: int = 0

    @property
    def size(self) -> int:
        return int(self.period.size)


def policy_visits(network: Network, demand: DemandModel, result: SolveResult,
                  arrivals: Arrivals) -> Visits:
    """States at the start of each period along ``arrivals`` under ``result``'s own control
    (applied as solved from period 0, never re-solved), counted over paths and periods."""
    from rmkit.workflows.policies import FixedPolicy
    from rmkit.workflows.simulate import replay

    if result.period != 0:
        raise SolverError(f"{result.method}: needs a result solved from period 0 to find the "
                          "states its policy visits")
    outcome = replay(network, demand, FixedPolicy(result), arrivals, seed=0, trace=True)
    flat = outcome.trace
    n_paths, n_periods = flat.shape
    n_states = network.state_space_size
    key = np.arange(n_periods, dtype=np.int64)[None, :] * n_states + flat
    pairs, counts = np.unique(key.ravel(), return_counts=True)
    period, state = np.divmod(pairs, n_states)
    sizes = [int(c) + 1 for c in network.capacities]
    grid = np.stack(np.unravel_index(state, sizes), axis=1).astype(np.int64)
    return Visits(period=period, state=grid, weight=counts / counts.sum(), n_paths=n_paths)


def quoted_bid_prices(result: SolveResult, visits: Visits) -> np.ndarray:
    """``(K, m)`` the bid prices a method's result quotes at each visited (period, state).

    A table is looked up at ``(t, x_i)``; a static vector is the same everywhere (no re-solve).
    """
    m = visits.state.shape[1]
    if "bid_price_table" in result:
        table = np.asarray(result["bid_price_table"])
        return table[visits.period[:, None] - result.period, visits.state, np.arange(m)[None, :]]
    return np.broadcast_to(np.asarray(result.bid_prices, dtype=np.float64), (visits.size, m))


def visit_weighted_errors(
    visits: Visits,
    incidence: np.ndarray,
    exact_leg: np.ndarray,
    exact_cost: np.ndarray,
    method_leg: np.ndarray,
    method_cost: np.ndarray | None = None,
) -> dict[str, float]:
    """Visit-weighted mean absolute and maximum errors (see :mod:`rmkit.workflows.compare`).

    ``method_cost`` defaults to the sum of the method's leg bid prices over each product's legs.
    """
    a = np.asarray(incidence)
    if method_cost is None:  # sum over the product's own legs only (+inf elsewhere must not leak)
        method_cost = np.where(a[None, :, :] > 0, np.asarray(method_leg)[:, :, None], 0.0).sum(
            axis=1)
    leg_mask = visits.state >= 1
    cost_mask = np.all(visits.state[:, :, None] >= a[None, :, :], axis=1)
    out: dict[str, float] = {}
    for label, exact, method, mask in (
        ("bid_price", exact_leg, method_leg, leg_mask),
        ("opportunity_cost", exact_cost, method_cost, cost_mask),
    ):
        with np.errstate(invalid="ignore"):
            err = np.where(mask, np.abs(np.asarray(method) - np.asarray(exact)), 0.0)
        if not mask.any():
            out[f"{label}_error_mean"] = out[f"{label}_error_max"] = math.nan
            continue
        w = visits.weight[:, None] * mask
        out[f"{label}_error_mean"] = float((w * err).sum() / w.sum())
        out[f"{label}_error_max"] = float(err[mask].max())
    return out


def exact_bid_price_table(
    visits: Visits, exact_leg: np.ndarray, network: Network, n_periods: int,
    min_visits: int = MIN_TABLE_VISITS,
) -> np.ndarray:
    """``(T, C+1, m)`` visit-weighted mean exact bid price given period and the leg's seats left.

    Averages ``m_i(t, x)`` over the visited states with ``x_i`` seats on leg i in period t; NaN
    where the optimal policy goes fewer than ``min_visits`` times (too few to average over the
    other legs' states), ``+inf`` at 0 seats and NaN above capacity (the :mod:`rmkit.results`
    table conventions).
    """
    m = network.n_legs
    width = network.max_capacity + 1
    total = np.zeros((n_periods, width, m))
    weight = np.zeros((n_periods, width, m))
    legs = np.broadcast_to(np.arange(m), visits.state.shape)
    periods = np.broadcast_to(visits.period[:, None], visits.state.shape)
    w = np.broadcast_to(visits.weight[:, None], visits.state.shape)
    finite = visits.state >= 1
    idx = (periods[finite], visits.state[finite], legs[finite])
    np.add.at(total, idx, (w * np.where(finite, exact_leg, 0.0))[finite])
    np.add.at(weight, idx, w[finite])
    enough = weight * visits.n_paths * n_periods >= min_visits - 1e-9
    with np.errstate(invalid="ignore", divide="ignore"):
        table = np.where(enough & (weight > 0), total / np.where(weight > 0, weight, 1.0), np.nan)
    table[:, 0, :] = np.inf
    for i, c in enumerate(network.capacities):
        table[:, int(c) + 1 :, i] = np.nan
    return table
