"""Single-leg nested controls: Littlewood's rule, EMSR-a, EMSR-b and the optimal static levels.

Classes are numbered from 0, the highest fare: ``f_0 > f_1 > ... > f_{k-1}``, with independent
demands ``D_j``. In the static model the lowest class books first, the highest last. The
*protection level* ``y_j`` (j = 0 .. k-2) is the number of seats held back for classes 0..j
against class j+1; nested booking limits follow as ``b_0 = C`` and ``b_{j+1} = C - y_j``.

Littlewood (1972), two classes. Protect the y-th seat for the high class while its expected
marginal value beats the low fare: ``f_0 P(D_0 >= y) > f_1``. Continuous (normal) demand gives
``y = mu + sigma * Phi^{-1}(1 - f_1/f_0)``. With discrete demand rmkit uses

    y = max{ y >= 0 : P(D_0 >= y) > f_1 / f_0 },

i.e. ``>=`` inside the tail (the y-th seat is used when demand reaches y) and a strict ``>``
against the fare ratio (a seat worth exactly the low fare goes to the low fare). This is the
same comparison as the single-leg DP (:mod:`rmkit.methods.shared.leg_dp`). Example: fares 100/60, Poisson
mean 80: ``P(D >= 78) = 0.6034 > 0.6 >= P(D >= 79) = 0.5594``, so y = 78. The expected marginal
value of the x-th seat is ``f_0 P(D_0 >= x)`` (:func:`marginal_seat_value`).

EMSR-a (Belobaba 1987): ``y_j = sum_{i <= j} y_i^{j+1}`` with ``y_i^{j+1}`` Littlewood's level of
class i against class j+1 alone.

EMSR-b (Belobaba 1992): classes 0..j are merged into one with demand ``S_j = D_0 + ... + D_j``
(normal: means and variances add; Poisson: means add) and the demand-weighted fare
``fbar_j = sum_{i<=j} f_i E[D_i] / E[S_j]``; then ``y_j`` is Littlewood's level of that class
against class j+1: ``fbar_j P(S_j >= y) > f_{j+1}``. The raw levels can decrease in j (a class
whose fare is close to the next one's and whose demand is very uncertain); nested limits need
them non-decreasing, so rmkit returns their running maximum (a no-op on well-behaved data,
including every published example we check). Levels are clipped at 0.

Optimal static levels (Brumelle & McGill 1993), the expected sales and revenue of nested levels
and the discretised demand they use: :mod:`rmkit.methods.shared.nested_static`.

EMSR-b seat values (the heuristic bid price of :mod:`rmkit.methods.emsrb_heuristic`). The x-th
seat belongs to nest ``j(x) = min{j : Y_j >= x}`` (the smallest nest that protects it; the last
class owns every seat no nest protects) and its expected marginal seat revenue is

    v(x) = min( f_{j(x)}, fbar_{j(x)} P(S_{j(x)} >= x) ),

the merged class's expected revenue from that seat, capped at the lowest fare the nest admits.
By construction ``f_{j+1} < v(x) <= f_j`` on the seats of nest j, so ``v`` does not increase with
x and the bid-price rule "accept class c iff f_c >= v(x)" accepts exactly the classes EMSR-b's
nested limits accept with x seats left. For the normal law the seat-by-seat form uses
``P(S > x - 1/2)`` (a continuity correction), which makes the integer levels ``Y_j`` the
continuous EMSR-b levels rounded to the nearest integer.

>>> float(emsr_b([1050.0, 567.0], [17.3, 45.1], [5.8, 15.0])[0]).__round__(2)
16.72
>>> littlewood(100.0, 60.0, 80.0, law="poisson")
78
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from rmkit.errors import InputError

LAWS = ("normal", "poisson")
PMF_SLACK = 1e-9  # tolerated rounding in a pmf's total


# ------------------------------------------------------------------ input checks
def check_law(law: object) -> str:
    if law not in LAWS:
        raise InputError(f"law: must be 'normal' or 'poisson', got {law!r}")
    return str(law)


def check_fares(fares: Sequence[float] | np.ndarray, field: str = "fares") -> np.ndarray:
    """Fares of the classes, positive and strictly decreasing (class 0 the highest)."""
    f = np.asarray(fares, dtype=np.float64)
    if f.ndim != 1 or f.size == 0:
        raise InputError(f"{field}: needs one fare per class, got shape {f.shape}")
    for j, v in enumerate(f.tolist()):
        if not np.isfinite(v) or v <= 0:
            raise InputError(f"{field}[{j}]: fare of class {j} must be a finite number > 0, got {v!r}")
    bad = np.flatnonzero(np.diff(f) >= 0)
    if bad.size:
        j = int(bad[0]) + 1
        raise InputError(
            f"{field}[{j}]: nesting needs fares strictly decreasing from class 0 (the highest); "
            f"class {j} has fare {float(f[j])!r}, not below class {j - 1}'s {float(f[j - 1])!r}; "
            "sort the classes by fare and merge equal fares"
        )
    return f


def _check_non_negative(values: object, field: str, what: str, n: int) -> np.ndarray:
    a = np.asarray(values, dtype=np.float64)
    if a.shape != (n,):
        raise InputError(f"{field}: needs one {what} per class ({n}), got shape {a.shape}")
    for j, v in enumerate(a.tolist()):
        if not np.isfinite(v) or v < 0:
            raise InputError(f"{field}[{j}]: {what} of class {j} must be a finite number >= 0, got {v!r}")
    return a


def check_demand(
    means: object, stds: object, law: str, n: int
) -> tuple[np.ndarray, np.ndarray | None]:
    """Validated class means and (normal law only) standard deviations."""
    law = check_law(law)
    mu = _check_non_negative(means, "means", "mean demand", n)
    if law == "poisson":
        if stds is not None:
            raise InputError(
                "stds: the Poisson law's variance is its mean; give stds only with law='normal'"
            )
        return mu, None
    if stds is None:
        raise InputError("stds: the normal law needs one standard deviation per class")
    return mu, _check_non_negative(stds, "stds", "standard deviation", n)


def check_capacity(capacity: object, field: str = "capacity") -> int:
    if isinstance(capacity, bool) or not isinstance(capacity, (int, np.integer)) or capacity < 0:
        raise InputError(f"{field}: must be a whole number >= 0, got {capacity!r}")
    return int(capacity)


def check_pmfs(pmfs: object, n: int, field: str = "pmfs") -> np.ndarray:
    """``(n, N+1)`` demand pmfs over 0..N, one row per class, each summing to 1."""
    p = np.asarray(pmfs, dtype=np.float64)
    if p.ndim != 2 or p.shape[0] != n or p.shape[1] < 1:
        raise InputError(f"{field}: needs one pmf row per class ({n}), got shape {p.shape}")
    bad = np.argwhere(~np.isfinite(p) | (p < 0))
    if bad.size:
        j, d = (int(v) for v in bad[0])
        raise InputError(f"{field}[{j}][{d}]: probability of class {j} must be >= 0, got {p[j, d]!r}")
    sums = p.sum(axis=1)
    off = np.flatnonzero(np.abs(sums - 1.0) > PMF_SLACK)
    if off.size:
        j = int(off[0])
        raise InputError(f"{field}[{j}]: the pmf of class {j} must sum to 1, got {sums[j]:.9g}")
    return p


# ------------------------------------------------------------------ laws
def tail_probability(law: str, mean: np.ndarray, std: np.ndarray | None, seats: np.ndarray) -> np.ndarray:
    """P(D >= x), broadcast over mean/std and seats (x <= 0 gives 1)."""
    from scipy.special import ndtr, pdtrc

    x = np.asarray(seats, dtype=np.float64)
    if law == "poisson":
        out = pdtrc(np.maximum(x - 1.0, 0.0), mean)
        return np.where(x <= 0, 1.0, out)
    sd = np.asarray(std, dtype=np.float64)
    safe = np.where(sd > 0, sd, 1.0)
    return np.where(sd > 0, ndtr((mean - x) / safe), (mean >= x).astype(np.float64))


def _level(law: str, mean: np.ndarray, std: np.ndarray | None, ratio: np.ndarray) -> np.ndarray:
    """Littlewood's level: normal ``mu + sigma z_{1-r}`` (>= 0); Poisson max{y: P(D>=y) > r}."""
    from scipy.special import ndtri, pdtrc

    mean, ratio = np.broadcast_arrays(np.asarray(mean, float), np.asarray(ratio, float))
    if law == "normal":
        sd = np.broadcast_to(np.asarray(std, dtype=np.float64), mean.shape)
        # sd = 0 is deterministic demand: protect the mean while the ratio is below 1
        # (0 x ndtri(0 or 1) would be NaN).
        z = ndtri(1.0 - np.clip(ratio, 0.0, 1.0))
        spread = np.where(sd > 0, sd * np.where(sd > 0, z, 0.0), np.where(ratio < 1.0, 0.0, -np.inf))
        return np.maximum(mean + spread, 0.0)
    from scipy.stats import poisson

    y = np.nan_to_num(poisson.ppf(1.0 - ratio, mean), nan=0.0, posinf=0.0)
    for _ in range(64):  # ppf is within a step of the rule; settle the convention exactly
        up = pdtrc(y, mean) > ratio  # P(D >= y+1) > r: y+1 qualifies too
        down = (y >= 1) & ~(pdtrc(np.maximum(y - 1, 0), mean) > ratio)  # y does not
        if not (up.any() or down.any()):
            break
        y = y + up - down
    return y


def _discrete_level(tail: np.ndarray, ratio: float) -> int:
    """max{y >= 0 : tail[y] > ratio} for a non-increasing ``tail[y] = P(D >= y)``, y >= 1."""
    return int(np.count_nonzero(tail[1:] > ratio))


# ------------------------------------------------------------------ Littlewood
def _check_two_fares(high_fare: float, low_fare: float) -> None:
    check_fares([high_fare, low_fare], "fares (high, low)")


def littlewood(
    high_fare: float, low_fare: float, mean: float, std: float | None = None, law: str = "normal"
) -> float | int:
    """Seats to protect for the high class (Littlewood 1972); see the module docstring.

    Normal law: a real number (not rounded). Poisson law: the integer of the discrete rule.
    """
    _check_two_fares(high_fare, low_fare)
    mu, sd = check_demand([mean], None if std is None else [std], law, 1)
    y = _level(law, mu, sd, np.array([low_fare / high_fare]))[0]
    return int(y) if law == "poisson" else float(y)


def littlewood_pmf(high_fare: float, low_fare: float, pmf: Sequence[float] | np.ndarray) -> int:
    """Littlewood's discrete level for any high-class demand pmf over 0..N."""
    _check_two_fares(high_fare, low_fare)
    p = check_pmfs([pmf], 1, "pmf")[0]
    return _discrete_level(tails_of_pmf(p), low_fare / high_fare)


def marginal_seat_value(
    high_fare: float,
    seats: int | Sequence[int] | np.ndarray,
    mean: float,
    std: float | None = None,
    law: str = "normal",
) -> np.ndarray:
    """Expected marginal value of the x-th seat under Littlewood: ``f_high P(D_high >= x)``."""
    check_fares([high_fare], "high_fare")
    mu, sd = check_demand([mean], None if std is None else [std], law, 1)
    x = np.asarray(seats, dtype=np.float64)
    return high_fare * tail_probability(law, mu[0], None if sd is None else sd[0], x)


def marginal_seat_value_pmf(
    high_fare: float, seats: int | Sequence[int] | np.ndarray, pmf: Sequence[float] | np.ndarray
) -> np.ndarray:
    """``f_high P(D_high >= x)`` for a demand pmf over 0..N (zero beyond N)."""
    check_fares([high_fare], "high_fare")
    tails = np.append(tails_of_pmf(check_pmfs([pmf], 1, "pmf")[0]), 0.0)
    x = np.clip(np.asarray(seats, dtype=np.int64), 0, tails.size - 1)
    return high_fare * tails[x]


def tails_of_pmf(p: np.ndarray) -> np.ndarray:
    """``t[..., a] = P(D >= a)`` for a = 0..N from pmfs over 0..N (last axis)."""
    return np.flip(np.cumsum(np.flip(p, axis=-1), axis=-1), axis=-1)


# ------------------------------------------------------------------ EMSR
def emsr_a(
    fares: Sequence[float] | np.ndarray,
    means: Sequence[float] | np.ndarray,
    stds: Sequence[float] | np.ndarray | None = None,
    law: str = "normal",
) -> np.ndarray:
    """EMSR-a protection levels ``y_0 .. y_{k-2}`` (Belobaba 1987)."""
    f = check_fares(fares)
    mu, sd = check_demand(means, stds, law, f.size)
    k = f.size
    i, j = np.meshgrid(np.arange(k), np.arange(k - 1), indexing="ij")  # class i vs class j+1
    ratio = np.where(i <= j, f[j + 1] / f[i], 0.5)  # only i <= j is used
    per_class = _level(law, mu[:, None], None if sd is None else sd[:, None], ratio)
    return np.where(i <= j, per_class, 0.0).sum(axis=0)


def _aggregate(f: np.ndarray, mu: np.ndarray, var: np.ndarray | None):
    """EMSR-b's merged classes: cumulative means, variances and demand-weighted fares."""
    s = np.cumsum(mu, axis=-1)
    rev = np.cumsum(mu * f, axis=-1)
    fbar = np.where(s > 0, rev / np.where(s > 0, s, 1.0), f)
    # A demand-weighted mean lies between the merged fares; with subnormal means the
    # division can round outside (e.g. below the next class's fare), so clip it back.
    fbar = np.clip(fbar, f, np.maximum.accumulate(f, axis=-1))
    return s, None if var is None else np.cumsum(var, axis=-1), fbar


def emsr_b(
    fares: Sequence[float] | np.ndarray,
    means: Sequence[float] | np.ndarray,
    stds: Sequence[float] | np.ndarray | None = None,
    law: str = "normal",
) -> np.ndarray:
    """EMSR-b protection levels ``y_0 .. y_{k-2}`` (Belobaba 1992), non-decreasing."""
    f = check_fares(fares)
    mu, sd = check_demand(means, stds, law, f.size)
    s, v, fbar = _aggregate(f, mu, None if sd is None else sd**2)
    ratio = f[1:] / fbar[:-1]
    raw = _level(law, s[:-1], None if v is None else np.sqrt(v[:-1]), ratio)
    return np.maximum.accumulate(raw) if raw.size else raw


def booking_limits(protection: Sequence[float] | np.ndarray, capacity: float) -> np.ndarray:
    """Nested booking limits ``b_0 = C``, ``b_{j+1} = C - y_j``, each clipped to [0, C]."""
    c = float(capacity)
    if not np.isfinite(c) or c < 0:
        raise InputError(f"capacity: must be a number >= 0, got {capacity!r}")
    y = np.asarray(protection, dtype=np.float64).reshape(-1)
    for j, v in enumerate(y.tolist()):
        if not np.isfinite(v) or v < 0:
            raise InputError(f"protection[{j}]: level of classes 0..{j} must be >= 0, got {v!r}")
    return np.concatenate([[c], np.clip(c - y, 0.0, c)])


# ------------------------------------------------------------------ seat values (bid prices)
def emsr_b_curve(
    fares: np.ndarray,
    means: np.ndarray,
    variances: np.ndarray | None,
    law: str,
    n_seats: int,
) -> tuple[np.ndarray, np.ndarray]:
    """EMSR-b integer levels and seat values, vectorised over leading (e.g. period) axes.

    Parameters
    ----------
    fares
        ``(..., k)`` (broadcast against ``means``) class fares, strictly decreasing (not
        re-checked: callers validate). Classes of zero fare and zero demand may pad the end of a
        row (to batch legs with different class counts): they change neither the real classes'
        levels nor any seat value.
    means, variances
        ``(..., k)`` class demand means and (normal law) variances.
    n_seats
        Seats to value, x = 1..n_seats.

    Returns
    -------
    levels
        ``(..., k-1)`` int: ``Y_j = #{x in 1..n_seats : fbar_j P(S_j >= x) > f_{j+1}}``,
        running maximum over j (at most ``n_seats``).
    values
        ``(..., n_seats+1)``: ``values[..., x]`` = v(x) of the module docstring, +inf at x = 0;
        zero everywhere when there is no class.
    """
    mu = np.asarray(means, dtype=np.float64)
    batch = mu.shape[:-1]
    values = np.zeros((*batch, n_seats + 1))
    values[..., 0] = np.inf
    k = mu.shape[-1]
    fares = np.broadcast_to(np.asarray(fares, dtype=np.float64), mu.shape)
    if k == 0 or n_seats == 0:
        return np.zeros((*batch, max(k - 1, 0)), dtype=np.int64), values
    s, v, fbar = _aggregate(fares, mu, variances)
    x = np.arange(1, n_seats + 1, dtype=np.float64)
    if law == "poisson":
        tail = _poisson_tail_grid(s, n_seats)
    else:
        tail = tail_probability(law, s[..., None], np.sqrt(v)[..., None], x - 0.5)
    emsr = fbar[..., None] * tail  # (..., k, n): merged class j's value of the x-th seat
    levels = np.count_nonzero(emsr[..., :-1, :] > fares[..., 1:, None], axis=-1)
    levels = np.maximum.accumulate(levels, axis=-1) if k > 1 else levels
    nest = np.count_nonzero(levels[..., :, None] < x, axis=-2)  # (..., n): j(x)
    owned = np.take_along_axis(emsr, nest[..., None, :], axis=-2)[..., 0, :]
    values[..., 1:] = np.minimum(np.take_along_axis(fares, nest, axis=-1), owned)
    return levels.astype(np.int64), values


def _poisson_tail_grid(mean: np.ndarray, n: int) -> np.ndarray:
    """``P(D >= x)`` for x = 1..n, Poisson ``mean`` (any shape): ``(..., n)``.

    One exp per cell (the pmf in log space, summed), several times cheaper than the incomplete
    gamma function and non-increasing in x by construction; agrees with it to ~1e-15.
    """
    from scipy.special import gammaln

    d = np.arange(n, dtype=np.float64)
    m = np.asarray(mean, dtype=np.float64)[..., None]
    log_m = np.log(np.where(m > 0, m, 1.0))
    pmf = np.where(m > 0, np.exp(d * log_m - m - gammaln(d + 1.0)), (d == 0).astype(np.float64))
    return np.maximum(1.0 - np.cumsum(pmf, axis=-1), 0.0)


def levels_from_seat_values(values: np.ndarray, fares: np.ndarray) -> np.ndarray:
    """Nested levels a non-increasing seat-value curve implies: ``#{x >= 1 : v(x) > f_{j+1}}``.

    ``values`` ``(..., n+1)`` (index 0 ignored), ``fares`` ``(..., k)``; returns ``(..., k-1)``.
    """
    v = np.asarray(values, dtype=np.float64)[..., 1:]
    f = np.asarray(fares, dtype=np.float64)
    return np.count_nonzero(v[..., None, :] > f[..., 1:, None], axis=-1).astype(np.int64)


# ------------------------------------------------------------------ grouping into buckets
def group_fares(
    fares: np.ndarray, weights: np.ndarray, n_groups: int | None = None
) -> np.ndarray:
    """Contiguous groups of fares sorted high to low; returns a group label per fare (0 = highest).

    Equal fares always share a group. With ``n_groups=None`` every distinct fare is a group;
    otherwise at most ``n_groups`` groups minimising the demand-weighted sum of squared
    deviations of the fares from their group's weighted mean (the exact one-dimensional optimum,
    by dynamic programming over the sorted distinct fares: W. D. Fisher (1958), "On grouping for
    maximum homogeneity", JASA 53(284):789-798). Zero total weight falls back to equal weights.
    """
    f = np.asarray(fares, dtype=np.float64)
    w = np.asarray(weights, dtype=np.float64)
    if f.size == 0:
        return np.zeros(0, dtype=np.int64)
    if np.any(np.diff(f) > 0):
        raise InputError("fares: group_fares needs fares sorted from high to low")
    distinct, first = np.unique(-f, return_inverse=True)  # ascending -f: high fares first
    m = distinct.size
    if n_groups is None or m <= n_groups:
        return first.astype(np.int64)
    if w.sum() <= 0:
        w = np.ones_like(w)
    dw = np.bincount(first, weights=w, minlength=m)
    dv = -distinct
    # prefix sums over distinct fares give the cost of any contiguous run [a, b) in O(1)
    cw = np.concatenate([[0.0], np.cumsum(dw)])
    cf = np.concatenate([[0.0], np.cumsum(dw * dv)])
    cff = np.concatenate([[0.0], np.cumsum(dw * dv * dv)])
    a = np.arange(m + 1)[:, None]
    b = np.arange(m + 1)[None, :]
    sw = cw[b] - cw[a]
    sf = cf[b] - cf[a]
    cost = (cff[b] - cff[a]) - np.where(sw > 0, sf * sf / np.where(sw > 0, sw, 1.0), 0.0)
    cost = np.where(a < b, np.maximum(cost, 0.0), np.inf)
    best = cost[0].copy()  # best[b]: one group over the first b distinct fares
    cut = np.zeros((n_groups, m + 1), dtype=np.int64)
    for g in range(1, n_groups):
        total = best[:, None] + cost  # [a, b]: g groups on [0, a) then one on [a, b)
        cut[g] = np.argmin(total, axis=0)
        best = total[cut[g], np.arange(m + 1)]
    labels = np.empty(m, dtype=np.int64)
    end = m
    for g in range(n_groups - 1, -1, -1):
        start = cut[g, end] if g > 0 else 0
        labels[start:end] = g
        end = start
    return labels[first]
