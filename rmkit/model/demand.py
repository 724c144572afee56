"""The demand-model interface every solver and the simulator use, and the registry of demand kinds.

Time runs over periods ``t = 0, ..., T-1``; in each period at most one customer arrives. A
*customer type* k arrives in period t with probability ``lambda[t, k]`` (``sum_k lambda[t, k] <= 1``)
and then buys at most one product, according to what is on offer at that moment. Demand kinds
differ in what a customer type is and how it chooses:

* ``independent`` (:mod:`rmkit.model.independent`): one type per product; a customer of type j
  asks for product j and buys it if it is offered, else nothing (Talluri & van Ryzin 2004, ch. 3).
* further kinds register the same way (:func:`register_demand_kind`), e.g. customers who choose
  among the products offered.

What solvers and the simulator may ask a demand model (and nothing else):

``sale_probabilities(offered, period)``
    ``(T - period, n)``: the chance of a sale of product j in period t when the set ``offered``
    stays open (default: every product). For independent demand this is the request table.
``demand_to_come(period, offered)``
    ``(n,)``: the expected sales from ``period`` to the end with ``offered`` open.
``sample_arrivals(n_paths, seed)``
    :class:`Arrivals`: each period's customer type (or -1) plus one uniform number that decides
    what she buys from whatever is offered when she arrives. A function of the seed alone, so
    every policy simulated with the same seed meets the same customers (common random numbers).
``fingerprint()``
    sha256 of the model's content (which arrays, not which object).
``kernel_data()``
    the arrays the simulator's numba ``choose`` function of this kind reads.

Sampling. One uniform number ``u[k, t]`` per path and period from numpy's PCG64 stream of the seed.
The customer type is the first k with ``u < cumsum(lambda[t])[k]`` (none past the row's total).
The *purchase number* is the position of u within that type's interval, rescaled to ``[0, 1)``:
given the type it is uniform and independent of it, so one draw decides both.

>>> import numpy as np
>>> d = DemandModel(np.array([[0.2, 0.1], [0.3, 0.4]]))  # shorthand for IndependentDemand
>>> d.kind, d.demand_to_come(0).tolist()
('independent', [0.5, 0.5])
"""

from __future__ import annotations

import abc
import hashlib
import math
from typing import TYPE_CHECKING, Any, ClassVar, NamedTuple

import numpy as np

from rmkit.errors import InputError

if TYPE_CHECKING:  # pragma: no cover
    from rmkit.model.network import Network

#: Tolerated excess of a row of arrival probabilities over 1 (rounding in published files).
ROW_SUM_SLACK = 1e-9


def readonly(a: np.ndarray) -> np.ndarray:
    a.setflags(write=False)
    return a


class Arrivals(NamedTuple):
    """Sampled customers: ``customer[k, t]`` (type index or -1) and ``uniform[k, t]`` in [0, 1).

    ``uniform`` is ``(0, 0)`` for kinds whose customers need no purchase number (independent
    demand: the customer's type is the product she asks for).
    """

    customer: np.ndarray  # int32 (paths, T)
    uniform: np.ndarray  # float64 (paths, T) or (0, 0)

    @property
    def n_paths(self) -> int:
        return int(self.customer.shape[0])

    @property
    def n_periods(self) -> int:
        return int(self.customer.shape[1])


def check_arrival_table(p: np.ndarray, field_name: str, what: str = "probability",
                        column: str = "column") -> None:
    """Raise :class:`InputError` naming the first entry or row that breaks the arrival rules."""
    if p.ndim != 2:
        raise InputError(f"{field_name}: must be a (periods x columns) table, got shape {p.shape}")
    if p.shape[0] < 1:
        raise InputError(f"{field_name}: needs at least one period")
    bad = np.argwhere(~np.isfinite(p) | (p < 0) | (p > 1))
    if bad.size:
        t, j = (int(v) for v in bad[0])
        raise InputError(
            f"{field_name}[period {t}, {column} {j}]: {what} must be in [0, 1], got {p[t, j]!r}"
        )
    sums = p.sum(axis=1)
    over = np.flatnonzero(sums > 1.0 + ROW_SUM_SLACK)
    if over.size:
        t = int(over[0])
        raise InputError(
            f"{field_name}[period {t}]: arrival probabilities sum to {sums[t]:.6g} > 1, but at "
            "most one customer arrives per period; use more periods or lower probabilities"
        )


class _DemandMeta(abc.ABCMeta):
    """``DemandModel(...)`` is shorthand for the default kind, ``IndependentDemand(p)``."""

    def __call__(cls, *args: Any, **kwargs: Any):
        if cls is DemandModel:
            return demand_kinds()[DEFAULT_KIND](*args, **kwargs)
        return super().__call__(*args, **kwargs)


class DemandModel(metaclass=_DemandMeta):
    """The interface of every demand kind; instances are frozen and validated on construction."""

    #: Name of the kind (``Solver.demand_kinds`` lists the kinds a method accepts).
    kind: ClassVar[str] = ""
    #: One line for listings.
    description: ClassVar[str] = ""
    #: Keys of the scenario file's ``[demand]`` table that select this kind.
    spec_keys: ClassVar[tuple[str, ...]] = ()

    # ------------------------------------------------------------ facts
    @property
    @abc.abstractmethod
    def n_periods(self) -> int: ...

    @property
    @abc.abstractmethod
    def n_products(self) -> int: ...

    @property
    def n_customer_types(self) -> int:
        return int(self.arrival_probabilities().shape[1])

    @abc.abstractmethod
    def customer_type_ids(self, network: Network) -> list[str]:
        """Labels of the customer types (product ids for independent demand)."""

    @abc.abstractmethod
    def arrival_probabilities(self) -> np.ndarray:
        """``(T, K)`` read-only: the chance that a customer of type k arrives in period t."""

    # ------------------------------------------------------------ queries of the solvers
    @abc.abstractmethod
    def sale_probabilities(self, offered: np.ndarray | None = None, period: int = 0) -> np.ndarray:
        """``(T - period, n)``: chance of a sale of each product per period with ``offered`` open."""

    def demand_to_come(self, period: int = 0, offered: np.ndarray | None = None) -> np.ndarray:
        """Expected sales per product in periods ``period .. T-1`` with ``offered`` open."""
        self._check_period(period, allow_end=True)
        if period == self.n_periods:
            return np.zeros(self.n_products)
        return self.sale_probabilities(offered, period).sum(axis=0)

    def check_period(self, period: int, field_name: str = "period") -> int:
        """A valid period index, or :class:`InputError` naming ``field_name``."""
        return self._check_period(period, field_name=field_name)

    def _check_period(self, period: Any, *, allow_end: bool = False, field_name: str = "period"
                      ) -> int:
        if isinstance(period, bool) or not isinstance(period, (int, np.integer)):
            raise InputError(f"{field_name}: must be a whole number, got {period!r}")
        top = self.n_periods if allow_end else self.n_periods - 1
        if not 0 <= period <= top:
            raise InputError(f"{field_name}: period index must be in [0, {top}], got {period}")
        return int(period)

    def check_network(self, network: Network) -> None:
        """Raise :class:`InputError` when this model does not fit ``network``'s products."""
        if self.n_products != network.n_products:
            raise InputError(
                f"demand: has {self.n_products} products but the network has "
                f"{network.n_products}; give one demand column per product"
            )

    # ------------------------------------------------------------ the simulator's queries
    #: Whether the simulator needs a purchase number per arrival (False: the type decides).
    needs_purchase_number: ClassVar[bool] = True
    #: Whether a customer of type j asks for product j and nothing else (then a control with a
    #: fixed offer is replayed without asking the demand kernel).
    one_product_per_customer: ClassVar[bool] = False

    def sample_arrivals(self, n_paths: int, seed: int) -> Arrivals:
        """Customers of ``n_paths`` paths, a function of the seed; path k does not depend on
        ``n_paths`` (the first k paths of a longer run equal a shorter run's)."""
        from rmkit.kernels.sampling import draw_arrivals

        if isinstance(n_paths, bool) or not isinstance(n_paths, (int, np.integer)) or n_paths < 1:
            raise InputError(f"paths: must be a whole number >= 1, got {n_paths!r}")
        self.check_sample_size(n_paths)
        rng = np.random.Generator(np.random.PCG64(seed))
        u = rng.random((int(n_paths), self.n_periods))
        cum = np.cumsum(self.arrival_probabilities(), axis=1)
        customer = np.empty(u.shape, dtype=np.int32)
        uniform = np.empty(u.shape if self.needs_purchase_number else (0, 0))
        draw_arrivals(u, cum, customer, uniform)
        return Arrivals(customer, uniform)

    def check_sample_size(self, n_paths: int, field: str = "paths") -> None:
        """Refuse (:class:`rmkit.errors.ProblemTooLargeError`) before drawing ``n_paths`` paths
        whose arrays would not fit in the memory available."""
        from rmkit.limits import check_memory

        # the uniform draws, the customers and (some kinds) the purchase numbers, per path
        per_path = self.n_periods * (8 + 4 + 8 * self.needs_purchase_number)
        check_memory(int(n_paths) * per_path, f"{n_paths:,} paths x {self.n_periods:,} periods",
                     field, advice="use fewer paths and combine runs with different seeds")

    @abc.abstractmethod
    def kernel_data(self) -> NamedTuple:
        """The arrays of this kind's ``choose`` function in :mod:`rmkit.kernels.replay`."""

    # ------------------------------------------------------------ identity and files
    @abc.abstractmethod
    def content_arrays(self) -> tuple[np.ndarray, ...]:
        """Every array that determines the model (what :meth:`fingerprint` hashes)."""

    def fingerprint(self) -> str:
        """sha256 of the kind and content: equal models give equal fingerprints."""
        h = hashlib.sha256(self.kind.encode())
        for a in self.content_arrays():
            arr = np.ascontiguousarray(a)
            h.update(str(arr.dtype).encode() + str(arr.shape).encode())
            h.update(arr.tobytes())
        return h.hexdigest()

    @classmethod
    @abc.abstractmethod
    def from_spec(cls, table: dict[str, Any], network: Network) -> DemandModel:
        """Build from the scenario file's ``[demand]`` table (already parsed TOML)."""

    @abc.abstractmethod
    def to_spec(self, network: Network) -> dict[str, Any]:
        """The ``[demand]`` table that :meth:`from_spec` reads back to an equal model."""

    @classmethod
    @abc.abstractmethod
    def random_example(cls, network: Network, n_periods: int, seed: int) -> DemandModel:
        """A small random model on ``network`` (the shared contract tests run on it)."""


#: Demand kind name -> class.
DEMAND_KINDS: dict[str, type[DemandModel]] = {}


def register_demand_kind(cls: type[DemandModel]) -> type[DemandModel]:
    """Class decorator: make a demand kind known to scenario files, solvers and the simulator."""
    if not cls.kind:
        raise TypeError(f"{cls.__name__} needs a non-empty 'kind'")
    if cls.kind in DEMAND_KINDS and DEMAND_KINDS[cls.kind] is not cls:
        raise TypeError(f"two demand kinds are named {cls.kind!r}")
    DEMAND_KINDS[cls.kind] = cls
    return cls


def demand_kinds() -> dict[str, type[DemandModel]]:
    """Every registered demand kind (importing the modules of the bundled ones)."""
    import importlib

    for module in _BUNDLED_KINDS:
        importlib.import_module(module)
    return DEMAND_KINDS


#: Modules of the demand kinds rmkit ships (each registers itself on import).
_BUNDLED_KINDS = ("rmkit.model.independent", "rmkit.model.choice")
#: The kind ``DemandModel(...)`` builds: the standard independent-demand model.
DEFAULT_KIND = "independent"


def load_factor(network: Network, demand: DemandModel) -> float:
    """alpha = expected seat requests over the horizon / total capacity (Topaloglu 2009).

    Seat requests are the expected sales with every product offered, counted on every leg a
    product uses (the *demand factor*; not the seats actually sold).
    """
    seat_demand = float((network.incidence @ demand.demand_to_come(0)).sum())
    total = float(network.capacities.sum())
    return math.inf if total == 0 else seat_demand / total


def check_compatible(network: Network, demand: DemandModel) -> None:
    if not isinstance(demand, DemandModel):
        raise InputError(f"demand: expected a DemandModel, got {type(demand).__name__}")
    demand.check_network(network)
