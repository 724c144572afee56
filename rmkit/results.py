"""The one result type every solver returns.

Solvers hand back raw numpy arrays keyed by the variable names of :data:`SCHEMA` (the solver's
part of the one schema, :mod:`rmkit.schema`, which knows each variable's dimensions, units and
meaning); :meth:`SolveResult.to_dataset` labels them. Coordinates carry what is compared (leg and
product ids, period and capacity indices); attrs carry provenance (method, parameters as JSON,
status, seed, rmkit version, wall time, the booking state solved from).

Conventions
-----------
* Periods are 0-based, ``0 .. T-1``; a result solved from period ``t0`` covers ``t0 .. T-1``.
* ``capacity`` runs over ``0 .. max_i c_i`` (the network's full capacities, so re-solves from
  any state share the same labels).
* ``bid_price_table[t, x, i]`` is the bid price of leg i for a request arriving in period t when
  the leg has x seats left: the value of its x-th seat, ``v_i(t+1, x) - v_i(t+1, x-1)``. It is
  ``+inf`` at x = 0 (no seat to sell) and NaN above the leg's capacity.
* ``leg_value[t, x, i]`` is a leg's value to go at the start of period t with x seats left.
"""

from __future__ import annotations

import json
import time
from collections.abc import Mapping
from dataclasses import InitVar, dataclass, field
from typing import Any

import numpy as np

from rmkit._version import __version__
from rmkit.errors import InputError
from rmkit.model.network import Network
from rmkit.schema import VARIABLES, VariableSpec

#: Shared status list (every back end's native status maps onto one of these).
STATUSES = ("optimal", "optimal_inaccurate", "infeasible", "iteration_limit", "error")


#: The variables a solver may return (dims, units and meaning in :data:`rmkit.schema.VARIABLES`).
SOLVE_VARIABLES = (
    "value", "value_stderr", "bid_price", "bid_price_table", "leg_value", "allocation",
    "net_fare", "protection_level", "booking_limit", "product_bucket", "bucket_fare",
    "multiplier", "bound_history", "gap_history", "opportunity_cost",
)
#: Variable name -> dims, units, meaning, for solver results (a view of the one schema).
SCHEMA: dict[str, VariableSpec] = {name: VARIABLES[name] for name in SOLVE_VARIABLES}


@dataclass(frozen=True)
class BookingState:
    """Where in the booking process a solve starts: a period and the seats left on each leg.

    ``capacity=None`` means the network's full capacities.
    """

    period: int = 0
    capacity: tuple[int, ...] | None = None

    def resolve(self, network: Network, n_periods: int) -> tuple[int, np.ndarray]:
        period = self.period
        if isinstance(period, bool) or not isinstance(period, (int, np.integer)):
            raise InputError(f"state.period: must be a whole number, got {period!r}")
        if not 0 <= period < n_periods:
            raise InputError(f"state.period: must be in [0, {n_periods - 1}], got {period}")
        if self.capacity is None:
            x = np.array(network.capacities, dtype=np.int64)
        else:
            x = network.check_capacity(self.capacity, "state.capacity")
        return int(period), x


def _dim_sizes(network: Network, period: int, n_periods: int) -> dict[str, int]:
    return {
        "leg": network.n_legs,
        "product": network.n_products,
        "period": n_periods - period,
        "capacity": network.max_capacity + 1,
    }


@dataclass(frozen=True, eq=False)
class StatePolicy:
    """A policy stored for every period and every capacity vector of the grid (the exact DP's).

    ``bits[t - t0, s, j // 8]`` has bit ``j % 8`` set iff product j is offered in period t at
    flat state ``s = sum_i x_i * strides[i]``, the row-major index over the network's *full*
    capacities ``(c_0+1, ..., c_{m-1}+1)``. ``values`` (optional) is the value to go at period
    ``t0`` over the whole grid.
    """

    bits: np.ndarray  # uint8 (T - t0, n_states, ceil(n / 8))
    strides: np.ndarray  # int64 (n_legs,)
    t0: int = 0
    values: np.ndarray | None = None

    def __post_init__(self) -> None:
        bits = np.ascontiguousarray(self.bits, dtype=np.uint8)
        strides = np.ascontiguousarray(self.strides, dtype=np.int64)
        if bits.ndim != 3 or strides.ndim != 1:
            raise ValueError(f"StatePolicy: bits must be 3-D and strides 1-D, got {bits.shape}, "
                             f"{strides.shape}")
        for name, a in (("bits", bits), ("strides", strides)):
            a.setflags(write=False)
            object.__setattr__(self, name, a)
        if self.values is not None:
            v = np.array(self.values, dtype=np.float64, copy=True)
            v.setflags(write=False)
            object.__setattr__(self, "values", v)

    def flat_index(self, capacity: np.ndarray) -> np.ndarray:
        """Flat grid index of capacity vectors (shape ``(..., m)`` -> ``(...)``)."""
        return np.asarray(capacity, dtype=np.int64) @ self.strides

    def offers(self, period: int, capacity: np.ndarray, n_products: int) -> np.ndarray:
        """``(n,)`` bool: the products offered in ``period`` with ``capacity`` seats left."""
        row = self.bits[int(period) - self.t0, int(self.flat_index(capacity))]
        return np.unpackbits(row, bitorder="little")[:n_products].astype(bool)


@dataclass(frozen=True, eq=False)
class SolveResult:
    """What every solver returns: labelled-by-schema arrays plus provenance.

    ``variables`` maps :data:`SCHEMA` names to arrays. ``policy`` is a stored policy over the
    whole state grid (the exact DP's), when the method gives one. ``payload`` holds unlabelled
    other parts of rmkit need (e.g. the exact DP's packed decisions); it is not exported.
    """

    method: str
    network: Network
    n_periods: int
    variables: Mapping[str, np.ndarray]
    status: str = "optimal"
    parameters: Mapping[str, Any] = field(default_factory=dict)
    seed: int | None = None
    seconds: float = 0.0
    period: int = 0
    capacity: tuple[int, ...] = ()
    message: str = ""
    payload: Mapping[str, Any] = field(default_factory=dict)
    policy: StatePolicy | None = None
    #: True when the caller hands its arrays over (keeps no reference to them): they are made
    #: read-only in place instead of copied. Solvers set it through ``SolveOutput.owned``.
    owned: InitVar[bool] = False

    def __post_init__(self, owned: bool) -> None:
        if self.status not in STATUSES:
            raise ValueError(f"status must be one of {STATUSES}, got {self.status!r}")
        sizes = _dim_sizes(self.network, self.period, self.n_periods)
        checked: dict[str, np.ndarray] = {}
        for name, arr in self.variables.items():
            if name not in SCHEMA:
                raise ValueError(f"{self.method}: unknown result variable {name!r}")
            a = np.asarray(arr) if owned else np.array(arr, copy=True)
            dims = SCHEMA[name].dims
            if a.ndim != len(dims):
                raise ValueError(f"{self.method}: {name} needs dims {dims}, got shape {a.shape}")
            for d, n in zip(dims, a.shape, strict=True):
                if d in sizes and sizes[d] != n:
                    raise ValueError(
                        f"{self.method}: {name} has {n} along {d!r}, expected {sizes[d]}"
                    )
            a.setflags(write=False)
            checked[name] = a
        object.__setattr__(self, "variables", checked)
        if not self.capacity:
            object.__setattr__(self, "capacity", tuple(int(c) for c in self.network.capacities))

    # ----------------------------------------------------------- accessors
    def __getitem__(self, name: str) -> np.ndarray:
        return self.variables[name]

    def __contains__(self, name: object) -> bool:
        return name in self.variables

    @property
    def value(self) -> float:
        return float(self.variables["value"]) if "value" in self.variables else float("nan")

    @property
    def stderr(self) -> float | None:
        v = self.variables.get("value_stderr")
        return None if v is None else float(v)

    @property
    def bid_prices(self) -> np.ndarray:
        """Leg bid prices at the state solved from (static, or looked up in the table)."""
        if "bid_price" in self.variables:
            return self.variables["bid_price"]
        if "bid_price_table" in self.variables:
            return self.bid_prices_at(self.period, np.asarray(self.capacity))
        raise KeyError(f"{self.method} gives no bid prices")

    def bid_prices_at(self, period: int, capacity: np.ndarray) -> np.ndarray:
        """Leg bid prices for a request in ``period`` with ``capacity`` seats left per leg."""
        if "bid_price_table" in self.variables:
            table = self.variables["bid_price_table"]
            x = np.asarray(capacity, dtype=np.int64)
            return table[period - self.period, x, np.arange(x.size)]
        return self.bid_prices

    # ----------------------------------------------------------- export
    def coords(self) -> dict[str, Any]:
        net = self.network
        return {
            "leg": np.array(net.leg_ids, dtype=object),
            "product": np.array(net.product_ids, dtype=object),
            "period": np.arange(self.period, self.n_periods),
            "capacity": np.arange(net.max_capacity + 1),
        }

    def attrs(self) -> dict[str, Any]:
        return {
            "method": self.method,
            "status": self.status,
            "message": self.message,
            "parameters": json.dumps(dict(self.parameters), sort_keys=True, default=str),
            "seed": -1 if self.seed is None else int(self.seed),
            "seconds": float(self.seconds),
            "state_period": int(self.period),
            "state_capacity": json.dumps([int(c) for c in self.capacity]),
            "network": self.network.name,
            "rmkit_version": __version__,
        }

    def to_dataset(self):
        """The result as an ``xarray.Dataset`` (dims and units from :data:`SCHEMA`)."""
        import xarray as xr

        from rmkit import schema

        coords = self.coords()
        data_vars = {name: schema.variable(name, arr) for name, arr in self.variables.items()}
        used = {d for var in data_vars.values() for d in var.dims}
        ds = xr.Dataset(data_vars, coords={k: v for k, v in coords.items() if k in used})
        ds.attrs.update(self.attrs())
        return ds


class Timer:
    """Wall-clock seconds of a block, for the ``seconds`` attr."""

    def __enter__(self) -> Timer:
        self.start = time.perf_counter()
        self.seconds = 0.0
        return self

    def __exit__(self, *exc: object) -> None:
        self.seconds = time.perf_counter() - self.start
