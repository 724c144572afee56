"""Independent demand: the standard discrete-time request model, the first demand kind.

In period t at most one request arrives; it is for product j with probability ``p[t, j]`` and
there is none with probability ``1 - sum_j p[t, j]`` (Talluri & van Ryzin 2004, ch. 3). A request
for j is a customer who buys j if it is offered and nothing otherwise: there is one customer type
per product and no choice. Requests in different periods are independent, so the number of
requests for j from period t on (the *demand to come*) is a sum of independent Bernoulli
variables with mean ``sum_{s >= t} p[s, j]``; LP-type methods use that mean, or a Poisson law
with that mean.

Sampled streams: the customer type of each period is the product requested (or -1), drawn from
one uniform number per path and period (:mod:`rmkit.model.demand`); no purchase number is needed.

Scenario files give the table in one of three forms (the ``[demand]`` table, beside ``periods``):
``[[demand.curve]]`` (expected requests spread by a beta booking curve), ``probabilities`` (the
dense table) or ``[[demand.request]]`` (sparse entries). See the README.

>>> import numpy as np
>>> d = IndependentDemand(np.array([[0.2, 0.1], [0.3, 0.4]]))
>>> d.demand_to_come(1).tolist()
[0.3, 0.4]
>>> d.sale_probabilities(np.array([True, False])).tolist()
[[0.2, 0.0], [0.3, 0.0]]
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Annotated, Any, ClassVar, NamedTuple

import numpy as np
from pydantic import BaseModel, ConfigDict, Field

from rmkit.errors import InputError, quoted
from rmkit.limits import MAX_COUNT, check_memory
from rmkit.model.demand import (
    ROW_SUM_SLACK,
    DemandModel,
    check_arrival_table,
    readonly,
    register_demand_kind,
)

if TYPE_CHECKING:  # pragma: no cover
    from rmkit.model.network import Network


def check_probability_table(p: np.ndarray, field_name: str = "demand.probabilities") -> None:
    """Raise :class:`InputError` naming the first entry or row that breaks the model's rules."""
    check_arrival_table(p, field_name, "probability", column="product")


@register_demand_kind
@dataclass(frozen=True, eq=False)
class IndependentDemand(DemandModel):
    """Request probabilities ``p[t, j]`` of the discrete-time model; validated, read-only.

    Parameters
    ----------
    probabilities
        ``(T, n_products)`` array; row sums at most 1.
    """

    kind: ClassVar[str] = "independent"
    description: ClassVar[str] = "one request type per product; a request buys its product if open"
    spec_keys: ClassVar[tuple[str, ...]] = ("curve", "probabilities", "request")
    needs_purchase_number: ClassVar[bool] = False
    one_product_per_customer: ClassVar[bool] = True

    probabilities: np.ndarray
    _to_come: np.ndarray = field(init=False, repr=False)

    def __post_init__(self) -> None:
        p = np.array(self.probabilities, dtype=np.float64, copy=True)
        check_probability_table(p)
        object.__setattr__(self, "probabilities", readonly(p))
        # to_come[t] = expected requests per product in periods t..T-1; to_come[T] = 0.
        tc = np.zeros((p.shape[0] + 1, p.shape[1]))
        tc[:-1] = np.cumsum(p[::-1], axis=0)[::-1]
        object.__setattr__(self, "_to_come", readonly(tc))

    # ---------------------------------------------------------------- constructors
    @classmethod
    def from_booking_curves(
        cls,
        n_periods: int,
        expected_demand: np.ndarray,
        curve_shapes: np.ndarray,
    ) -> IndependentDemand:
        """Spread each product's expected total demand over the horizon by a beta booking curve.

        Product j's arrival time, as a fraction of the horizon, follows a Beta(a_j, b_j) law; the
        request probability in period t is ``m_j * (F_j((t+1)/T) - F_j(t/T))``. A curve with
        ``a < b`` books early (cheap products), ``a > b`` late (expensive ones).

        Raises :class:`InputError` naming how many periods are needed when T is too small for
        the row sums to stay at or below 1.
        """
        m = np.asarray(expected_demand, dtype=np.float64)
        shapes = np.asarray(curve_shapes, dtype=np.float64)
        if isinstance(n_periods, bool) or not isinstance(n_periods, (int, np.integer)):
            raise InputError(f"demand.periods: must be a whole number >= 1, got {n_periods!r}")
        if n_periods < 1:
            raise InputError(f"demand.periods: must be >= 1, got {n_periods}")
        for j, mj in enumerate(m):
            if not math.isfinite(mj) or mj < 0:
                raise InputError(
                    f"demand.curve[{j}].expected: mean demand must be finite and >= 0, got {mj!r}"
                )
        if shapes.shape != (m.size, 2):
            raise InputError("demand.curve: each product needs a shape [a, b]")
        for j, (a, b) in enumerate(shapes):
            if not (math.isfinite(a) and math.isfinite(b) and a > 0 and b > 0):
                raise InputError(
                    f"demand.curve[{j}].shape: beta parameters must be > 0, got [{a!r}, {b!r}]"
                )
        p = booking_curve_table(int(n_periods), m, shapes)
        worst = float(p.sum(axis=1).max())
        if worst > 1.0 + ROW_SUM_SLACK:
            need = periods_needed(int(n_periods), m, shapes)
            raise InputError(
                f"demand.periods: {n_periods} periods give up to {worst:.3g} expected requests in "
                f"one period, but the model allows at most one; use at least {need} periods"
            )
        return cls(p)

    # ---------------------------------------------------------------- the interface
    @property
    def n_periods(self) -> int:
        return int(self.probabilities.shape[0])

    @property
    def n_products(self) -> int:
        return int(self.probabilities.shape[1])

    def customer_type_ids(self, network: Network) -> list[str]:
        return list(network.product_ids)

    def arrival_probabilities(self) -> np.ndarray:
        return self.probabilities

    def sale_probabilities(self, offered: np.ndarray | None = None, period: int = 0) -> np.ndarray:
        period = self._check_period(period)
        p = self.probabilities[period:]
        if offered is None:
            return p
        return p * np.asarray(offered, dtype=bool)[None, :]

    def demand_to_come(self, period: int = 0, offered: np.ndarray | None = None) -> np.ndarray:
        period = self._check_period(period, allow_end=True)
        if offered is None:
            return self._to_come[period]
        return self._to_come[period] * np.asarray(offered, dtype=bool)

    @property
    def demand_to_come_table(self) -> np.ndarray:
        """``(T+1, n)``: row t is :meth:`demand_to_come` of t (row T is zero)."""
        return self._to_come

    def kernel_data(self) -> NamedTuple:
        from rmkit.kernels.independent_demand import IndependentKernelData

        return IndependentKernelData(self.n_products)

    def content_arrays(self) -> tuple[np.ndarray, ...]:
        return (self.probabilities,)

    # ---------------------------------------------------------------- independent-demand extras
    def to_come_pmf(self, period: int, max_count: int, law: str = "exact") -> np.ndarray:
        """``(n, max_count+1)`` pmf of each product's demand to come; the last column is the tail.

        ``law="exact"`` is the sum-of-Bernoullis (Poisson-binomial) law of the model;
        ``law="poisson"`` the Poisson law with the same mean. Column ``max_count`` holds
        ``P(D >= max_count)`` so rows sum to 1.
        """
        n = self.n_products
        k = int(max_count)
        out = np.zeros((n, k + 1))
        if law == "poisson":
            from scipy.stats import poisson

            mu = self.demand_to_come(period)
            ks = np.arange(k)
            out[:, :k] = poisson.pmf(ks[None, :], mu[:, None])
        elif law == "exact":
            out[:, 0] = 1.0
            for q in self.probabilities[period:]:  # convolution, one Bernoulli per period
                shifted = np.zeros_like(out)
                shifted[:, 1:] = out[:, :-1]
                shifted[:, -1] += out[:, -1]
                out = out * (1.0 - q)[:, None] + shifted * q[:, None]
            return out
        else:
            raise InputError(f"law: must be 'exact' or 'poisson', got {law!r}")
        out[:, k] = np.clip(1.0 - out[:, :k].sum(axis=1), 0.0, 1.0)
        return out

    def sample_streams(self, n_paths: int, seed: int) -> np.ndarray:
        """``(n_paths, T)`` int32 request streams (product index or -1), a function of the seed."""
        return self.sample_arrivals(n_paths, seed).customer

    def sample_demand_to_come(self, n_samples: int, seed: int, period: int = 0) -> np.ndarray:
        """``(n_samples, n_products)`` counts of requests in periods ``period .. T-1``."""
        from rmkit.kernels.sampling import count_requests

        streams = self.sample_streams(n_samples, seed)[:, period:]
        out = np.zeros((streams.shape[0], self.n_products), dtype=np.int64)
        count_requests(streams, out)
        return out

    # ---------------------------------------------------------------- files
    @classmethod
    def from_spec(cls, table: dict[str, Any], network: Network) -> IndependentDemand:
        from rmkit.model.spec_errors import validated

        spec = validated(IndependentSpec, table, ("demand",))
        return _demand_from_spec(spec, network)

    def to_spec(self, network: Network) -> dict[str, Any]:
        return {
            "periods": self.n_periods,
            "probabilities": [[float(v) for v in row] for row in self.probabilities],
        }

    @classmethod
    def random_example(cls, network: Network, n_periods: int, seed: int) -> IndependentDemand:
        rng = np.random.default_rng(seed)
        raw = rng.uniform(0.1, 1.0, size=(n_periods, network.n_products))
        return cls(raw / raw.sum(axis=1, keepdims=True) * 0.8)


# -------------------------------------------------------------------- the scenario table
class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)


class CurveSpec(_Strict):
    product: str
    expected: float
    shape: list[float]


class RequestSpec(_Strict):
    period: int
    product: str
    probability: Annotated[float, Field(ge=0.0, le=1.0, allow_inf_nan=False)]


class IndependentSpec(_Strict):
    periods: Annotated[int, Field(ge=1, le=MAX_COUNT)]
    curve: list[CurveSpec] | None = None
    probabilities: list[list[float]] | None = None
    request: list[RequestSpec] | None = None


def _demand_from_spec(d: IndependentSpec, network: Network) -> IndependentDemand:
    n = network.n_products
    given = [k for k in ("curve", "probabilities", "request") if getattr(d, k) is not None]
    if len(given) != 1:
        raise InputError(
            "demand: give exactly one of [[demand.curve]], demand.probabilities or "
            f"[[demand.request]]; got {', '.join(given) or 'none'}"
        )
    check_table_size(d.periods, n)
    ids = {pid: j for j, pid in enumerate(network.product_ids)}

    def product_index(where: str, pid: str) -> int:
        if pid not in ids:
            raise InputError(f"{where}.product: unknown product {pid!r}; known: {quoted(ids)}")
        return ids[pid]

    if d.curve is not None:
        m = np.zeros(n)
        shapes = np.ones((n, 2))
        seen: set[int] = set()
        for k, c in enumerate(d.curve):
            j = product_index(f"demand.curve[{k}]", c.product)
            if j in seen:
                raise InputError(f"demand.curve[{k}].product: {c.product!r} has two curves")
            seen.add(j)
            if len(c.shape) != 2:
                raise InputError(
                    f"demand.curve[{k}].shape: needs two beta parameters [a, b], got {c.shape!r}"
                )
            m[j] = c.expected
            shapes[j] = c.shape
        return IndependentDemand.from_booking_curves(d.periods, m, shapes)
    if d.probabilities is not None:
        rows = d.probabilities
        if len(rows) != d.periods:
            raise InputError(
                f"demand.probabilities: has {len(rows)} rows but demand.periods = {d.periods}; "
                "give one row per period"
            )
        for t, row in enumerate(rows):
            if len(row) != n:
                raise InputError(
                    f"demand.probabilities[{t}]: has {len(row)} entries, needs one per product ({n})"
                )
        return IndependentDemand(np.array(rows, dtype=np.float64))
    p = np.zeros((d.periods, n))
    first: dict[tuple[int, int], int] = {}
    for k, r in enumerate(d.request or []):
        if not 0 <= r.period < d.periods:
            raise InputError(
                f"demand.request[{k}].period: period index must be in [0, {d.periods - 1}], "
                f"got {r.period}"
            )
        j = product_index(f"demand.request[{k}]", r.product)
        if (r.period, j) in first:  # summing would hide a typo (or a negative correction)
            raise InputError(
                f"demand.request[{k}]: period {r.period}, product {r.product!r} is already given "
                f"by demand.request[{first[r.period, j]}]; give each (period, product) once"
            )
        first[r.period, j] = k
        p[r.period, j] = r.probability
    check_probability_table(p, "demand.request")
    return IndependentDemand(p)


def check_table_size(n_periods: int, n_products: int, field: str = "demand.periods") -> None:
    """Refuse, before allocating, a request table the machine cannot hold (the table, its
    demand-to-come sums and a working copy: three ``(T, n)`` float64 arrays)."""
    check_memory(3 * 8 * n_periods * max(n_products, 1),
                 f"{n_periods:,} periods x {n_products} products", field,
                 advice="use fewer periods")


# -------------------------------------------------------------------- booking curves
def booking_curve_table(n_periods: int, m: np.ndarray, shapes: np.ndarray) -> np.ndarray:
    """``(T, n)``: expected demand ``m`` spread over T periods by Beta(a, b) curves."""
    from scipy.special import betainc

    edges = np.linspace(0.0, 1.0, n_periods + 1)
    cdf = betainc(shapes[:, 0][None, :], shapes[:, 1][None, :], edges[:, None])
    return np.diff(cdf, axis=0) * m[None, :]


def periods_needed(n_periods: int, m: np.ndarray, shapes: np.ndarray) -> int:
    """The fewest periods (at least ``n_periods``) whose curve table keeps every row sum <= 1."""

    def ok(t: int) -> bool:
        return float(booking_curve_table(t, m, shapes).sum(axis=1).max()) <= 1.0 + ROW_SUM_SLACK

    hi = n_periods
    while not ok(hi):
        hi *= 2
        if hi > 10_000_000:
            return hi
    lo = max(n_periods, hi // 2)
    while lo < hi:
        mid = (lo + hi) // 2
        if ok(mid):
            hi = mid
        else:
            lo = mid + 1
    return hi
