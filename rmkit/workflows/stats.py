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


class GapEstimate(NamedTuple):
    """The gap ``bound - mean revenue`` in currency and percent of the bound, with its standard
    error and 95% interval, and how the bound's own sampling error entered (``pairing``)."""

    gap: float
    stderr: float
    ci_low: float
    ci_high: float
    percent: float
    percent_stderr: float
    percent_ci_low: float
    percent_ci_high: float
    pairing: str
    common_paths: int


#: ``GapEstimate.pairing``: how the bound's error was combined with the policy's.
PAIRINGS = ("deterministic bound", "independent", "paired")


def gap_estimate(revenue: np.ndarray, bound: float, bound_stderr: float | None = None,
                 bound_paths: np.ndarray | None = None) -> GapEstimate:
    """The gap of a policy simulated on ``revenue`` (per path) to an upper bound or optimum.

    Three cases, named in ``pairing``:

    * ``deterministic bound`` (``bound_stderr`` 0 or None, no path values): only the policy is
      sampled; ``SE = s_R / sqrt(N)``, the interval uses Student t with ``N - 1`` df (the same
      as the revenue's own interval).
    * ``independent``: the bound is a sample mean with standard error ``se_B`` from other
      streams; ``SE = sqrt(se_R^2 + se_B^2)``.
    * ``paired``: ``bound_paths`` holds the bound's per-path values on the same request streams
      as the first ``n = min(K, N)`` simulated paths (path k of
      :meth:`~rmkit.model.demand.DemandModel.sample_arrivals` with the same seed; ``K`` bound
      paths, ``N`` policy paths). The gap is still ``mean(B) - mean(R)`` over all paths of each,
      and ``Var = s_B^2 / K + s_R^2 / N - 2 n cov(B, R) / (K N)`` with the covariance over the
      ``n`` shared paths: the exact variance of a difference of two means that share ``n``
      draws. With ``K = N = n`` it is the paired variance ``s_D^2 / N``; the bound and the
      revenue of a path rise and fall together (both grow with the demand drawn), so pairing
      shrinks the interval.

    Sampled cases use Student t with ``min(K, N) - 1`` df (conservative). The percent gap is
    ``100 gap / bound`` with the bound in the denominator taken as fixed: its error enters the
    numerator only (a first-order approximation, second order when ``se_B << bound``).
    """
    r = np.asarray(revenue, dtype=np.float64)
    r = r[np.isfinite(r)]
    n_r = r.size
    nan = math.nan
    if n_r == 0 or not math.isfinite(bound):
        return GapEstimate(nan, nan, nan, nan, nan, nan, nan, nan, "", 0)
    mean_r = float(r.mean())
    var_r = float(r.var(ddof=1)) / n_r if n_r > 1 else nan
    common = 0
    if bound_paths is not None and np.size(bound_paths) >= 2:
        b = np.asarray(bound_paths, dtype=np.float64)
        k = b.size
        common = min(k, n_r)
        shared = np.cov(b[:common], r[:common], ddof=1)[0, 1] if common >= 2 else 0.0
        value = float(b.mean())
        var = float(b.var(ddof=1)) / k + var_r - 2.0 * common * float(shared) / (k * n_r)
        pairing, df_n = "paired", min(k, n_r)
    elif bound_stderr is not None and math.isfinite(bound_stderr) and bound_stderr > 0:
        value, var = float(bound), var_r + float(bound_stderr) ** 2
        pairing, df_n = "independent", n_r
    else:
        value, var = float(bound), var_r
        pairing, df_n = "deterministic bound", n_r
    gap = value - mean_r
    se = math.sqrt(max(var, 0.0)) if math.isfinite(var) else nan
    half = t_quantile(df_n) * se if df_n >= 2 and math.isfinite(se) else nan
    scale = 100.0 / value if value else nan
    return GapEstimate(gap, se, gap - half, gap + half, gap * scale, se * abs(scale),
                       (gap - half) * scale, (gap + half) * scale, pairing, common)
