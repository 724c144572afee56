"""What every booking control is: how a solver's result steers sales in the simulator.

A control is a class registered with :func:`rmkit.controls.register_control`. It turns a
:class:`~rmkit.results.SolveResult` into the arrays of its kernel function (checking that the
result can steer sales at all) and supplies that kernel function: ``offers(ctrl, k, t, j, seats,
memo, net)``, plain Python that numba compiles into the simulator's loop
(:mod:`rmkit.kernels.replay`). Solvers name their control in ``Tags.control``.

Class facts the simulator and the workflows read (never a control's name):

``adaptive``
    Recomputing the result from a new booking state can change the control (re-solves apply).
``sale_sensitive``
    A sale changes the control's inputs, so re-solving after every sale can change it.
``scalable``
    The control applies bid prices that :meth:`Control.scaled` can multiply (calibration).
``memory``
    The control keeps per-path memory (``memo[k, :]``, :meth:`Control.memory_width` whole
    numbers per path, laid out as the control likes), restarted whenever it is recomputed
    (nested limits count the sales since they were set).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING, Any, ClassVar, NamedTuple

import numpy as np

from rmkit.errors import SolverError

if TYPE_CHECKING:  # pragma: no cover
    from rmkit.model.demand import DemandModel
    from rmkit.model.network import Network
    from rmkit.results import SolveResult


def owned(a: Any, dtype: Any) -> np.ndarray:
    """A C-ordered writable copy, so every call hits the same compiled kernel signature."""
    return np.array(a, dtype=dtype, order="C", copy=True)


def read_only(a: Any, dtype: Any) -> np.ndarray:
    """A C-ordered read-only view (a copy only when the dtype or order differs), so every call
    hits the same compiled kernel signature: for large arrays the kernel only reads (a result's
    bid-price table), where a copy per re-solved state is memory the OS must hand over fresh."""
    out = np.ascontiguousarray(a, dtype=dtype).view()
    out.setflags(write=False)
    return out


def where(result: SolveResult) -> str:
    return f"{result.method} (period {result.period}, seats {list(result.capacity)})"


class Control:
    """Base class of booking controls (see the module docstring)."""

    name: ClassVar[str] = ""
    description: ClassVar[str] = ""
    #: The kernel arrays' NamedTuple class; each control has its own.
    arrays_type: ClassVar[type]
    adaptive: ClassVar[bool] = True
    sale_sensitive: ClassVar[bool] = False
    scalable: ClassVar[bool] = False
    memory: ClassVar[bool] = False
    #: False for controls that need no solve (first come, first served).
    needs_result: ClassVar[bool] = True

    #: Kernel functions (plain Python, compiled by numba); ``on_sale`` may stay None.
    offers: ClassVar[Callable[..., bool]]
    on_sale: ClassVar[Callable[..., None] | None] = None

    @classmethod
    def drives(cls, result: SolveResult) -> bool:
        """Whether ``result`` holds what this control applies (used for unregistered results)."""
        raise NotImplementedError

    @classmethod
    def arrays(cls, result: SolveResult | None, network: Network, capacity: np.ndarray
               ) -> NamedTuple:
        """The kernel arrays at seats left ``capacity``; :class:`SolverError` when the result
        cannot steer sales (failed status, NaN where the control looks, wrong shapes)."""
        raise NotImplementedError

    @classmethod
    def fixed_offer(cls, arrays: NamedTuple, network: Network) -> np.ndarray | None:
        """``(n,)`` bool: the products offered whenever each of their legs has a seat, for a
        control that looks at nothing else until it is recomputed (static bid prices); None
        for the others. Under demand whose customers each ask for one product the simulator
        then replays the control with a loop free of branches (:mod:`rmkit.kernels.fixed_offer`),
        to the same numbers as :meth:`offers`, which must agree with it."""
        return None

    @classmethod
    def memory_width(cls, arrays: NamedTuple) -> int:
        """Whole numbers of per-path memory the control uses (0: none)."""
        return 0

    @classmethod
    def scaled(cls, result: SolveResult, multiplier: float) -> SolveResult:
        """The result with the bid prices this control applies multiplied by ``multiplier``."""
        raise TypeError(f"control {cls.name!r} applies no bid prices to scale")

    @classmethod
    def example_result(cls, network: Network, demand: DemandModel, seed: int
                       ) -> SolveResult | None:
        """A result from period 0 that drives this control (for the shared policy contract)."""
        raise NotImplementedError

    @staticmethod
    def check_status(result: SolveResult) -> None:
        if result.status in ("error", "infeasible"):
            raise SolverError(
                f"{where(result)}: the solve ended with status {result.status!r} "
                f"({result.message}); the policy has no valid control there. Check the method's "
                "parameters or pick another"
            )


def scale_prices(values: np.ndarray, multiplier: float) -> np.ndarray:
    """Bid prices times ``multiplier``; +inf (no seat) and NaN (above capacity) stay as they are."""
    v = np.array(values, dtype=np.float64)
    return np.multiply(v, multiplier, out=v, where=np.isfinite(v))


def scaled_variables(result: SolveResult, names: tuple[str, ...], multiplier: float
                     ) -> SolveResult:
    import dataclasses

    variables = {k: (scale_prices(v, multiplier) if k in names else v)
                 for k, v in result.variables.items()}
    return dataclasses.replace(result, variables=variables)
