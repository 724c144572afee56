"""The statistics of simulated revenue: means with Student-t intervals and paired differences.

For per-path values ``R_1 .. R_n`` the estimate is the mean ``Rbar``, its standard error
``s / sqrt(n)`` (``s`` the sample standard deviation) and the 95% interval
``Rbar +- t_{0.975, n-1} s / sqrt(n)``. Two policies a, b simulated on the same customers (common
random numbers) are compared through ``D_k = R_ak - R_bk``: mean ``Dbar``, paired standard
error ``s_D / sqrt(n)`` and its Student-t interval. The unpaired standard error
``sqrt(s_a^2 + s_b^2) / sqrt(n)``, which ignores the pairing, is reported beside it for contrast:
``Var(D) = s_a^2 + s_b^2 - 2 cov(a, b)``, so the paired one is smaller whenever the two revenues
are positively correlated, as they are when both face the same customers.

>>> summarize(np.array([1.0, 2.0, 3.0, 4.0]))[:2]
(2.5, 0.6454972243679028)
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np

CONFIDENCE = 0.95


class Summary(NamedTuple):
    mean: float
    stderr: float
    ci_low: float
    ci_high: float


def t_quantile(n: int) -> float:
    """The two-sided 95% Student-t quantile with n - 1 degrees of freedom."""
    from scipy.stats import t as student_t

    return float(student_t.ppf(0.5 + CONFIDENCE / 2, n - 1))


def summarize(values: np.ndarray) -> Summary:
    """Mean, standard error and 95% Student-t confidence interval of per-path values (NaN
    spread for fewer than two paths)."""
    v = np.asarray(values, dtype=np.float64)
    n = v.size
    if n == 0:
        return Summary(math.nan, math.nan, math.nan, math.nan)
    mean = float(v.mean())
    if n < 2:
        return Summary(mean, math.nan, math.nan, math.nan)
    se = float(v.std(ddof=1) / math.sqrt(n))
    half = t_quantile(n) * se
    return Summary(mean, se, mean - half, mean + half)


class Differences(NamedTuple):
    """Paired differences of every policy against every other, ``(k, k)`` arrays."""

    mean: np.ndarray
    stderr: np.ndarray
    stderr_unpaired: np.ndarray
    ci_low: np.ndarray
    ci_high: np.ndarray


def paired_differences(revenue: np.ndarray, against: np.ndarray | None = None) -> Differences:
    """Row a minus row b of per-path revenues ``(k, n)``, for every b of ``against``
    (``(k2, n)``, default ``revenue`` itself): arrays ``(k, k2)``."""
    r = np.asarray(revenue, dtype=np.float64)
    o = r if against is None else np.asarray(against, dtype=np.float64)
    n = r.shape[1]
    diff = r[:, None, :] - o[None, :, :]
    mean = diff.mean(axis=2)
    if n < 2:
        nan = np.full(mean.shape, np.nan)
        return Differences(mean, nan, nan, nan, nan)
    paired = diff.std(axis=2, ddof=1) / math.sqrt(n)
    var_r = r.var(axis=1, ddof=1) / n
    var_o = o.var(axis=1, ddof=1) / n
    unpaired = np.sqrt(var_r[:, None] + var_o[None, :])
    half = t_quantile(n) * paired
    return Differences(mean, paired, unpaired, mean - half, mean + half)
