"""The demand model every solver shares: the standard discrete-time arrival model.

Time runs over periods ``t = 0, ..., T-1``. In each period at most one request arrives; it is for
product j with probability ``p[t, j]`` and there is no request with probability
``1 - sum_j p[t, j]`` (Talluri & van Ryzin 2004, ch. 3, the independent-demand model in discrete
time). Requests in different periods are independent, so the number of requests for product j
from period t on (the *demand to come*) is a sum of independent Bernoulli variables with mean
``sum_{s >= t} p[s, j]``; LP-type methods use that mean, or a Poisson law with that mean.

Sampled request streams are ``(paths, T)`` integer arrays holding the product index requested in
each period or -1. They are a function of the seed alone (one uniform number per path and period
from numpy's PCG64), so every policy simulated with the same seed sees the same requests: the
common random numbers that make paired comparisons meaningful.

>>> import numpy as np
>>> d = DemandModel(np.array([[0.2, 0.1], [0.3, 0.4]]))
>>> d.demand_to_come(0).tolist()
[0.5, 0.5]
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from rmkit.errors import InputError

ROW_SUM_SLACK = 1e-9  # tolerated excess of a row sum over 1 (rounding in published files)


def _readonly(a: np.ndarray) -> np.ndarray:
    a.setflags(write=False)
    return a


def check_probability_table(p: np.ndarray, field_name: str = "demand.probabilities") -> None:
    """Raise :class:`InputError` naming the first entry or row that breaks the model's rules."""
    if p.ndim != 2:
        raise InputError(f"{field_name}: must be a (periods x products) table, got shape {p.shape}")
    if p.shape[0] < 1:
        raise InputError(f"{field_name}: needs at least one period")
    bad = np.argwhere(~np.isfinite(p) | (p < 0) | (p > 1))
    if bad.size:
        t, j = (int(v) for v in bad[0])
        raise InputError(
            f"{field_name}[period {t}, product {j}]: probability must be in [0, 1], "
            f"got {p[t, j]!r}"
        )
    sums = p.sum(axis=1)
    over = np.flatnonzero(sums > 1.0 + ROW_SUM_SLACK)
    if over.size:
        t = int(over[0])
        raise InputError(
            f"{field_name}[period {t}]: request probabilities sum to {sums[t]:.6g} > 1, but at "
            "most one request arrives per period; use more periods or lower probabilities"
        )


@dataclass(frozen=True, eq=False)
class DemandModel:
    """Request probabilities ``p[t, j]`` of the discrete-time model; validated, read-only.

    Parameters
    ----------
    probabilities
        ``(T, n_products)`` array; row sums at most 1.
    """

    probabilities: np.ndarray
    _to_come: np.ndarray = field(init=False, repr=False)

    def __post_init__(self) -> None:
        p = np.array(self.probabilities, dtype=np.float64, copy=True)
        check_probability_table(p)
        object.__setattr__(self, "probabilities", _readonly(p))
        # to_come[t] = expected requests per product in periods t..T-1; to_come[T] = 0.
        tc = np.zeros((p.shape[0] + 1, p.shape[1]))
        tc[:-1] = np.cumsum(p[::-1], axis=0)[::-1]
        object.__setattr__(self, "_to_come", _readonly(tc))

    # ---------------------------------------------------------------- constructors
    @classmethod
    def from_booking_curves(
        cls,
        n_periods: int,
        expected_demand: np.ndarray,
        curve_shapes: np.ndarray,
    ) -> DemandModel:
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
        p = _booking_curve_table(int(n_periods), m, shapes)
        worst = float(p.sum(axis=1).max())
        if worst > 1.0 + ROW_SUM_SLACK:
            need = _periods_needed(int(n_periods), m, shapes)
            raise InputError(
                f"demand.periods: {n_periods} periods give up to {worst:.3g} expected requests in "
                f"one period, but the model allows at most one; use at least {need} periods"
            )
        return cls(p)

    # ---------------------------------------------------------------- facts
    @property
    def n_periods(self) -> int:
        return int(self.probabilities.shape[0])

    @property
    def n_products(self) -> int:
        return int(self.probabilities.shape[1])

    def check_period(self, period: int, field_name: str = "period") -> int:
        if isinstance(period, bool) or not isinstance(period, (int, np.integer)):
            raise InputError(f"{field_name}: must be a whole number, got {period!r}")
        if not 0 <= period < self.n_periods:
            raise InputError(
                f"{field_name}: period index must be in [0, {self.n_periods - 1}], got {period}"
            )
        return int(period)

    def demand_to_come(self, period: int = 0) -> np.ndarray:
        """Expected number of requests per product in periods ``period .. T-1``."""
        if not 0 <= period <= self.n_periods:
            raise InputError(f"period: must be in [0, {self.n_periods}], got {period}")
        return self._to_come[period]

    @property
    def demand_to_come_table(self) -> np.ndarray:
        """``(T+1, n)``: row t is :meth:`demand_to_come` of t (row T is zero)."""
        return self._to_come

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

    # ---------------------------------------------------------------- sampling
    def sample_streams(self, n_paths: int, seed: int) -> np.ndarray:
        """``(n_paths, T)`` int32 request streams (product index or -1), a function of the seed.

        Path k's numbers do not depend on ``n_paths``: the first k paths of a longer run equal
        a shorter run's.
        """
        if n_paths < 1:
            raise InputError(f"paths: must be >= 1, got {n_paths}")
        from rmkit.kernels.sampling import draw_requests

        rng = np.random.Generator(np.random.PCG64(seed))
        u = rng.random((int(n_paths), self.n_periods))
        cum = np.cumsum(self.probabilities, axis=1)
        out = np.empty(u.shape, dtype=np.int32)
        draw_requests(u, cum, out)
        return out

    def sample_demand_to_come(self, n_samples: int, seed: int, period: int = 0) -> np.ndarray:
        """``(n_samples, n_products)`` counts of requests in periods ``period .. T-1``."""
        streams = self.sample_streams(n_samples, seed)[:, period:]
        from rmkit.kernels.sampling import count_requests

        out = np.zeros((streams.shape[0], self.n_products), dtype=np.int64)
        count_requests(streams, out)
        return out


def load_factor(network, demand: DemandModel) -> float:
    """alpha = expected seat requests over the horizon / total capacity (Topaloglu 2009)."""
    seat_demand = float((network.incidence @ demand.demand_to_come(0)).sum())
    total = float(network.capacities.sum())
    return math.inf if total == 0 else seat_demand / total


def check_compatible(network, demand: DemandModel) -> None:
    if demand.n_products != network.n_products:
        raise InputError(
            f"demand: has {demand.n_products} products but the network has "
            f"{network.n_products}; give one probability column per product"
        )


def _booking_curve_table(n_periods: int, m: np.ndarray, shapes: np.ndarray) -> np.ndarray:
    from scipy.special import betainc

    edges = np.linspace(0.0, 1.0, n_periods + 1)
    cdf = betainc(shapes[:, 0][None, :], shapes[:, 1][None, :], edges[:, None])
    return np.diff(cdf, axis=0) * m[None, :]


def _periods_needed(n_periods: int, m: np.ndarray, shapes: np.ndarray) -> int:
    def ok(t: int) -> bool:
        return float(_booking_curve_table(t, m, shapes).sum(axis=1).max()) <= 1.0 + ROW_SUM_SLACK

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
