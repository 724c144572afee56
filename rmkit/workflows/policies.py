"""Booking policies for the simulator: where a control comes from and the arrays it runs on.

A policy is a *source* of controls: asked for the control at a booking state (period t, seats
left x), it returns a :class:`~rmkit.results.SolveResult` whose variables the simulator's kernels
read. Three sources:

* :class:`SolverPolicy` wraps a registered method (``dlp``, ``lr``, ``exact``, ``davn`` ...) and
  solves it from each state it is asked about; its ``tags.control`` says how to apply the result.
* :class:`FixedPolicy` applies one result already computed (from period 0) and never re-solves.
* :class:`FirstComeFirstServed` accepts whenever every leg has a seat; it has nothing to solve.

:func:`control_arrays` turns a result into the kernels' inputs and refuses results that would make
the control meaningless (NaN bid prices, bucket indices out of range, wrong shapes), so a failed
solve is never silently replayed as "accept everything" or "refuse everything".

What re-solving means per control
---------------------------------
``bid_price``: new leg bid prices from the state. ``table``: a new bid-price table from the state
(the table already depends on the seats left, so recomputing it after every sale adds nothing:
``resolve_every_sale`` is a no-op). ``nested``: new booking limits, and the sales counted against
them restart from zero. ``exact``: the stored decisions already cover every state, so the policy
is solved once and never re-solved. ``fcfs``: nothing to solve.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np

from rmkit.errors import InputError, SolverError
from rmkit.model.demand import DemandModel
from rmkit.model.network import Network
from rmkit.results import BookingState, SolveResult

CONTROLS = ("fcfs", "bid_price", "table", "nested", "exact")
FCFS_NAME = "fcfs"
#: Controls whose inputs change when recomputed from a new state.
ADAPTIVE_CONTROLS = ("bid_price", "table", "nested")
#: Controls whose inputs change after a sale (so ``resolve_every_sale`` re-solves them).
SALE_SENSITIVE_CONTROLS = ("bid_price", "nested")


class PolicySource(Protocol):
    """What the simulator needs from a policy."""

    label: str
    control: str
    adaptive: bool
    parameters: dict[str, Any]

    def control_at(
        self, network: Network, demand: DemandModel, period: int, capacity: np.ndarray, seed: int
    ) -> SolveResult | None: ...


@dataclass
class FirstComeFirstServed:
    """Accept every request while each leg it uses has a seat: the floor every control must beat."""

    label: str = FCFS_NAME
    control: str = "fcfs"
    adaptive: bool = False
    parameters: dict[str, Any] = field(default_factory=dict)

    def control_at(self, network, demand, period, capacity, seed) -> None:
        return None


@dataclass
class SolverPolicy:
    """A registered method, solved from every booking state the simulator asks about."""

    solver: Any
    label: str = ""

    def __post_init__(self) -> None:
        self.label = self.label or self.solver.name
        if not self.solver.tags.gives_bid_prices:
            raise InputError(
                f"policy: {self.solver.name!r} is a bound without a booking control; pick a "
                "method that gives bid prices, booking limits or decisions"
            )
        if self.solver.tags.control not in CONTROLS:
            raise InputError(
                f"policy: {self.solver.name!r} declares control {self.solver.tags.control!r}, "
                f"which the simulator does not know; known controls: {', '.join(CONTROLS)}"
            )

    @property
    def control(self) -> str:
        return self.solver.tags.control

    @property
    def adaptive(self) -> bool:
        return self.control in ADAPTIVE_CONTROLS

    @property
    def parameters(self) -> dict[str, Any]:
        return self.solver.get_params()

    def control_at(self, network, demand, period, capacity, seed) -> SolveResult:
        state = BookingState(period=int(period), capacity=tuple(int(v) for v in capacity))
        return self.solver.solve(network, demand, state=state, seed=seed)


@dataclass
class FixedPolicy:
    """One precomputed result (solved from period 0), applied for the whole horizon.

    ``control`` defaults to the registered method's ``tags.control`` when ``result.method`` is
    registered, else it is read off the variables the result holds.
    """

    result: SolveResult
    control: str = ""
    label: str = ""
    adaptive: bool = False

    def __post_init__(self) -> None:
        self.label = self.label or self.result.method
        self.control = self.control or infer_control(self.result)
        if self.control not in CONTROLS:
            raise InputError(
                f"policy.control: must be one of {', '.join(CONTROLS)}, got {self.control!r}"
            )
        if self.result.period != 0:
            raise InputError(
                f"policy: a fixed result must be solved from period 0 to cover the horizon, got "
                f"one solved from period {self.result.period}; pass the method instead so the "
                "simulator can solve it"
            )

    @property
    def parameters(self) -> dict[str, Any]:
        return dict(self.result.parameters)

    def control_at(self, network, demand, period, capacity, seed) -> SolveResult:
        return self.result


def infer_control(result: SolveResult) -> str:
    """The control a result supports: its registered method's tag, else what its arrays allow."""
    from rmkit.methods.base import load_all

    registry = load_all()
    if result.method in registry:
        return registry[result.method].tags.control
    if "decision_bits" in result.payload:
        return "exact"
    if "booking_limit" in result and "bucket" in result:
        return "nested"
    if "bid_price_table" in result:
        return "table"
    if "bid_price" in result:
        return "bid_price"
    raise InputError(
        f"policy: result of {result.method!r} holds no control (bid_price, bid_price_table, "
        "booking_limit with bucket, or decision_bits); give a result that has one"
    )


def make_policy(policy: Any, params: dict[str, Any] | None = None) -> PolicySource:
    """A policy source from a method name, a solver instance, a result or a source."""
    from rmkit.methods.base import Solver, get_solver

    params = dict(params or {})
    if isinstance(policy, str):
        if policy == FCFS_NAME:
            if params:
                raise InputError(f"params: {FCFS_NAME!r} takes no parameters, got {sorted(params)}")
            return FirstComeFirstServed()
        return SolverPolicy(get_solver(policy, **params))
    if params:
        raise InputError("params: only apply to a policy given by name; set them on the object")
    if isinstance(policy, Solver):
        return SolverPolicy(policy)
    if isinstance(policy, SolveResult):
        return FixedPolicy(policy)
    if all(hasattr(policy, a) for a in ("label", "control", "adaptive", "control_at")):
        return policy
    raise InputError(
        f"policy: expected a method name, a Solver, a SolveResult or a policy source, got "
        f"{type(policy).__name__}"
    )


# ---------------------------------------------------------------- kernel inputs
@dataclass
class ControlArrays:
    """The kernels' control inputs; unused ones are empty arrays of the right type."""

    code: int
    t0: int = 0
    bid: np.ndarray = field(default_factory=lambda: np.zeros(0))
    table: np.ndarray = field(default_factory=lambda: np.zeros((0, 0, 0)))
    limit: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    bucket: np.ndarray = field(default_factory=lambda: np.zeros((0, 0), dtype=np.int64))
    bits: np.ndarray = field(default_factory=lambda: np.zeros((0, 0, 0), dtype=np.uint8))
    strides: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=np.int64))

    @property
    def n_buckets(self) -> int:
        return int(self.limit.shape[1])


def _owned(a: Any, dtype: Any) -> np.ndarray:
    """A C-ordered writable copy, so every call hits the same compiled kernel signature."""
    return np.array(a, dtype=dtype, order="C", copy=True)


def control_arrays(
    control: str, result: SolveResult | None, network: Network, capacity: np.ndarray
) -> ControlArrays:
    """Check a result and build the kernel inputs for ``control`` at seats left ``capacity``.

    Raises :class:`SolverError` when the result cannot steer sales (failed status, NaN where the
    control will look, inconsistent shapes). Approximate statuses (``optimal_inaccurate``,
    ``iteration_limit``) are applied; the simulator counts and reports them.
    """
    from rmkit.kernels.replay import CONTROL_CODES

    code = CONTROL_CODES[control]
    if control == "fcfs":
        return ControlArrays(code)
    assert result is not None
    where = f"{result.method} (period {result.period}, seats {list(result.capacity)})"
    if result.status in ("error", "infeasible"):
        raise SolverError(
            f"{where}: the solve ended with status {result.status!r} ({result.message}); the "
            "policy has no valid control there. Check the method's parameters or pick another"
        )
    m, n = network.n_legs, network.n_products
    if control == "bid_price":
        bid = _owned(result["bid_price"], np.float64)
        if np.isnan(bid).any():
            raise SolverError(f"{where}: bid prices contain NaN; the solve did not produce prices")
        return ControlArrays(code, bid=bid)
    if control == "table":
        table = _owned(result["bid_price_table"], np.float64)
        for i in range(m):  # every entry the control can look at must be a number or +inf
            if np.isnan(table[:, 1 : int(capacity[i]) + 1, i]).any():
                raise SolverError(
                    f"{where}: bid_price_table has NaN for leg {network.legs[i].id!r} within its "
                    "seats left; the table cannot steer sales"
                )
        return ControlArrays(code, t0=result.period, table=table)
    if control == "nested":
        limit = _owned(result["booking_limit"], np.float64)
        bucket = _owned(result["bucket"], np.int64)
        n_buckets = limit.shape[1]
        if bucket.shape != (m, n) or bucket.min() < -1 or bucket.max() >= n_buckets:
            raise SolverError(
                f"{where}: bucket must be (leg, product) indices in [-1, {n_buckets - 1}], got "
                f"shape {bucket.shape} with values in [{bucket.min()}, {bucket.max()}]"
            )
        if np.isnan(limit).any():
            raise SolverError(f"{where}: booking_limit contains NaN")
        return ControlArrays(code, limit=limit, bucket=bucket)
    bits = result.payload.get("decision_bits")
    strides = result.payload.get("state_strides")
    if bits is None or strides is None:
        raise SolverError(f"{where}: an exact policy needs payload decision_bits and state_strides")
    bits = _owned(bits, np.uint8)
    strides = _owned(strides, np.int64)
    expected = (result.n_periods - result.period, network.state_space_size, (n + 7) // 8)
    if bits.shape != expected or strides.shape != (m,):
        raise SolverError(
            f"{where}: decision_bits has shape {bits.shape} (expected {expected}) and "
            f"state_strides {strides.shape} (expected ({m},))"
        )
    return ControlArrays(code, t0=result.period, bits=bits, strides=strides)
