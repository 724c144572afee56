"""Customer-choice demand: segments of customers who choose among the products offered (MNL).

Model (Talluri & van Ryzin 2004, ch. 7; Liu & van Ryzin 2008, "On the choice-based linear
programming model for network revenue management", MSOM 10(2):288-310; Bront, Mendez-Diaz &
Vulcano 2009, Operations Research 57(3):769-784). In period t at most one customer arrives; she
belongs to segment l with probability ``lambda[t, l]`` (``sum_l lambda[t, l] <= 1``). A customer
of segment l considers the products ``C_l`` with multinomial-logit preference weights
``v_lj > 0`` and a no-purchase weight ``v_l0 >= 0``; offered the set S she buys j in ``S & C_l``
with probability

    P_lj(S) = v_lj / (v_l0 + sum_{k in S & C_l} v_lk),

and nothing otherwise. With ``v_l0 = 0`` she always buys when something she considers is open.
One segment per product, ``C_l = {j}`` and ``v_l0 = 0`` is independent demand: the sale
probabilities, the sampled customers and every method's numbers are then those of
:class:`~rmkit.model.independent.IndependentDemand` with the same table.

Customer types are the segments (ids from the scenario file). Sampling follows
:mod:`rmkit.model.demand`: one uniform number per path and period gives the segment and the
purchase number u; the simulator's kernel (:mod:`rmkit.kernels.choice_demand`) walks the
segment's considered products in the order given, asks the control which are offered, and picks
the first product whose cumulative share exceeds ``u * (v_l0 + sum of offered weights)`` (no
purchase last).

Scenario files (the ``[demand]`` table, beside ``periods``)::

    [[demand.segment]]
    id = "business-am"
    arrival = 0.1                 # probability per period, or a list with one per period
    consider = ["p2", "p4", "p6"] # product ids
    weights = [5.0, 10.0, 1.0]    # MNL weight of each considered product
    no_purchase = 1.0             # MNL weight of buying nothing

or, instead of ``arrival``, ``expected`` (mean arrivals over the horizon) and ``shape = [a, b]``
(a beta booking curve, as independent demand's ``[[demand.curve]]``).

>>> import numpy as np
>>> d = ChoiceDemand(np.array([[0.5], [0.5]]), consider=[[0, 1]], weights=[[1.0, 3.0]],
...                  no_purchase=[4.0], n_products=2)
>>> d.sale_probabilities().tolist()
[[0.0625, 0.1875], [0.0625, 0.1875]]
>>> d.sale_probabilities(np.array([True, False]), period=1).tolist()
[[0.1, 0.0]]
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, ClassVar, NamedTuple

import numpy as np
from pydantic import BaseModel, ConfigDict

from rmkit.errors import InputError
from rmkit.model.demand import (
    ROW_SUM_SLACK,
    DemandModel,
    check_arrival_table,
    readonly,
    register_demand_kind,
)

if TYPE_CHECKING:  # pragma: no cover
    from rmkit.model.network import Network

#: Most products one segment may consider (the simulator keeps the offered ones in one word).
MAX_CONSIDERED = 64


@register_demand_kind
@dataclass(frozen=True, eq=False)
class ChoiceDemand(DemandModel):
    """Segments with arrival probabilities, consideration sets and MNL weights; validated.

    Parameters
    ----------
    arrival
        ``(T, L)``: the chance that a customer of segment l arrives in period t.
    consider
        For each segment, the product indices it considers (in the order the simulator walks).
    weights
        For each segment, the preference weight of each considered product (finite, > 0).
    no_purchase
        ``(L,)`` no-purchase weights (finite, >= 0).
    n_products
        Products of the network (the consideration sets index into them).
    segment_ids
        Labels of the segments (default ``s0, s1, ...``).
    """

    kind: ClassVar[str] = "choice"
    description: ClassVar[str] = "segments choose among the offered products (multinomial logit)"
    spec_keys: ClassVar[tuple[str, ...]] = ("segment",)

    arrival: np.ndarray
    consider: tuple[tuple[int, ...], ...]
    weights: tuple[tuple[float, ...], ...]
    no_purchase: np.ndarray
    n_products_: int
    segment_ids: tuple[str, ...] = ()
    # CSR form: segment l considers seg_product[seg_ptr[l]:seg_ptr[l+1]] with seg_weight there.
    seg_ptr: np.ndarray = field(init=False, repr=False)
    seg_product: np.ndarray = field(init=False, repr=False)
    seg_weight: np.ndarray = field(init=False, repr=False)

    def __init__(self, arrival: Any, consider: Any, weights: Any, no_purchase: Any,
                 n_products: int, segment_ids: Any = ()) -> None:
        lam = np.array(arrival, dtype=np.float64, copy=True)
        if lam.ndim == 1:
            lam = lam[None, :]
        n_seg = lam.shape[1] if lam.ndim == 2 else 0
        ids = tuple(str(s) for s in segment_ids) or tuple(f"s{l}" for l in range(n_seg))
        sets = tuple(tuple(int(j) for j in c) for c in consider)
        wts = tuple(tuple(float(w) for w in c) for c in weights)
        v0 = np.array(no_purchase, dtype=np.float64, copy=True).reshape(-1)
        _check(lam, sets, wts, v0, int(n_products), ids)
        object.__setattr__(self, "arrival", readonly(lam))
        object.__setattr__(self, "consider", sets)
        object.__setattr__(self, "weights", wts)
        object.__setattr__(self, "no_purchase", readonly(v0))
        object.__setattr__(self, "n_products_", int(n_products))
        object.__setattr__(self, "segment_ids", ids)
        ptr = np.zeros(len(sets) + 1, dtype=np.int64)
        ptr[1:] = np.cumsum([len(c) for c in sets])
        object.__setattr__(self, "seg_ptr", readonly(ptr))
        object.__setattr__(self, "seg_product",
                           readonly(np.array([j for c in sets for j in c], dtype=np.int64)))
        object.__setattr__(self, "seg_weight",
                           readonly(np.array([w for c in wts for w in c], dtype=np.float64)))

    # ---------------------------------------------------------------- constructors
    @classmethod
    def independent_equivalent(cls, probabilities: np.ndarray) -> ChoiceDemand:
        """Independent demand written as choice: segment j considers only product j, v_j0 = 0."""
        p = np.asarray(probabilities, dtype=np.float64)
        n = p.shape[1]
        return cls(p, [[j] for j in range(n)], [[1.0] for _ in range(n)], np.zeros(n), n)

    # ---------------------------------------------------------------- the interface
    @property
    def n_periods(self) -> int:
        return int(self.arrival.shape[0])

    @property
    def n_products(self) -> int:
        return self.n_products_

    @property
    def n_segments(self) -> int:
        return int(self.arrival.shape[1])

    def customer_type_ids(self, network: Network) -> list[str]:
        return list(self.segment_ids)

    def arrival_probabilities(self) -> np.ndarray:
        return self.arrival

    def weight_matrix(self) -> np.ndarray:
        """``(L, n)``: v_lj where segment l considers j, else 0."""
        w = np.zeros((self.n_segments, self.n_products))
        for l, (c, v) in enumerate(zip(self.consider, self.weights, strict=True)):
            w[l, list(c)] = v
        return w

    def purchase_probabilities(self, offered: np.ndarray | None = None) -> np.ndarray:
        """``(L, n)``: P_lj(S), the chance that an arriving customer of segment l buys j."""
        return purchase_matrix(self.weight_matrix(), self.no_purchase, offered)

    def sale_probabilities(self, offered: np.ndarray | None = None, period: int = 0) -> np.ndarray:
        period = self._check_period(period)
        return self.arrival[period:] @ self.purchase_probabilities(offered)

    def kernel_data(self) -> NamedTuple:
        from rmkit.kernels.choice_demand import ChoiceKernelData

        return ChoiceKernelData(np.array(self.seg_ptr), np.array(self.seg_product),
                                np.array(self.seg_weight), np.array(self.no_purchase))

    def content_arrays(self) -> tuple[np.ndarray, ...]:
        return (self.arrival, self.seg_ptr, self.seg_product, self.seg_weight, self.no_purchase,
                np.array([self.n_products], dtype=np.int64))

    # ---------------------------------------------------------------- independent views
    def first_choice_probabilities(self) -> np.ndarray:
        """``(T, n)``: each segment asks only for its most preferred product (first on ties),
        which she buys with probability ``v / (v_0 + v)`` when it is offered alone."""
        out = np.zeros((self.n_periods, self.n_products))
        for l, (c, v) in enumerate(zip(self.consider, self.weights, strict=True)):
            q = int(np.argmax(v))
            out[:, c[q]] += self.arrival[:, l] * (v[q] / (self.no_purchase[l] + v[q]))
        return out

    # ---------------------------------------------------------------- files
    @classmethod
    def from_spec(cls, table: dict[str, Any], network: Network) -> ChoiceDemand:
        from rmkit.model.spec_errors import validated

        spec = validated(ChoiceSpec, table, ("demand",))
        return _choice_from_spec(spec, network)

    def to_spec(self, network: Network) -> dict[str, Any]:
        ids = network.product_ids
        segments = []
        for l in range(self.n_segments):
            col = self.arrival[:, l]
            arrival: float | list[float] = (float(col[0]) if np.all(col == col[0])
                                            else [float(v) for v in col])
            segments.append({
                "id": self.segment_ids[l],
                "arrival": arrival,
                "consider": [ids[j] for j in self.consider[l]],
                "weights": [float(w) for w in self.weights[l]],
                "no_purchase": float(self.no_purchase[l]),
            })
        return {"periods": self.n_periods, "segment": segments}

    @classmethod
    def random_example(cls, network: Network, n_periods: int, seed: int) -> ChoiceDemand:
        """Three segments: one considers every product, two a random half each; arrivals
        sum to 0.8 per period."""
        rng = np.random.default_rng(seed)
        n = network.n_products
        sets = [list(range(n))]
        for _ in range(2):
            k = max(1, n // 2)
            sets.append(sorted(rng.choice(n, size=k, replace=False).tolist()))
        weights = [rng.uniform(0.5, 5.0, size=len(c)).round(3).tolist() for c in sets]
        share = rng.uniform(0.2, 1.0, size=3)
        lam = np.tile(share / share.sum() * 0.8, (n_periods, 1))
        return cls(lam, sets, weights, [1.0, 0.5, 0.0], n, ("all", "half-a", "half-b"))


def purchase_matrix(w: np.ndarray, v0: np.ndarray, offered: np.ndarray | None) -> np.ndarray:
    """``(L, n)`` MNL purchase probabilities for weights ``w`` (L, n) and the set ``offered``.

    A segment with nothing to buy (no offered product and ``v_0 = 0``) buys nothing.
    """
    ws = w if offered is None else w * np.asarray(offered, dtype=bool)[None, :]
    denom = v0 + ws.sum(axis=1)
    safe = np.where(denom > 0, denom, 1.0)
    return ws / safe[:, None]


def _check(lam: np.ndarray, sets: tuple[tuple[int, ...], ...],
           wts: tuple[tuple[float, ...], ...], v0: np.ndarray, n: int,
           ids: tuple[str, ...]) -> None:
    """Raise :class:`InputError` naming the first segment field that breaks the model's rules."""
    n_seg = lam.shape[1] if lam.ndim == 2 else -1
    if lam.ndim != 2 or len(sets) != n_seg or len(wts) != n_seg or v0.size != n_seg:
        raise InputError(
            f"demand.segment: arrival {lam.shape}, {len(sets)} consideration sets, {len(wts)} "
            f"weight lists and {v0.size} no-purchase weights: give one of each per segment"
        )
    if len(ids) != n_seg or len(set(ids)) != n_seg:
        raise InputError(f"demand.segment: segment ids must be unique, one per segment; got "
                         f"{list(ids)}")
    for l, (c, v) in enumerate(zip(sets, wts, strict=True)):
        where = f"demand.segment[{l}]"
        if not c:
            raise InputError(f"{where}.consider: is empty; list at least one product id")
        if len(c) > MAX_CONSIDERED:
            raise InputError(f"{where}.consider: lists {len(c)} products, at most "
                             f"{MAX_CONSIDERED} allowed; split the segment")
        if len(v) != len(c):
            raise InputError(f"{where}.weights: has {len(v)} weights but consider lists "
                             f"{len(c)} products; give one weight per considered product")
        for j in c:
            if not 0 <= j < n:
                raise InputError(f"{where}.consider: product index {j} is not in [0, {n - 1}]")
        if len(set(c)) != len(c):
            raise InputError(f"{where}.consider: lists a product twice; list each once")
        for q, w in enumerate(v):
            if not (math.isfinite(w) and w > 0):
                raise InputError(f"{where}.weights[{q}]: a preference weight must be a finite "
                                 f"number > 0, got {w!r}")
        if not (math.isfinite(v0[l]) and v0[l] >= 0):
            raise InputError(f"{where}.no_purchase: must be a finite number >= 0, got "
                             f"{float(v0[l])!r}")
    check_arrival_table(lam, "demand.segment[*].arrival", "probability", column="segment")


# -------------------------------------------------------------------- the scenario table
class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)


class SegmentSpec(_Strict):
    id: str
    consider: list[str]
    weights: list[float]
    no_purchase: float = 0.0
    arrival: float | list[float] | None = None
    expected: float | None = None
    shape: list[float] | None = None


class ChoiceSpec(_Strict):
    periods: int
    segment: list[SegmentSpec]


def _choice_from_spec(d: ChoiceSpec, network: Network) -> ChoiceDemand:
    from rmkit.model.independent import booking_curve_table

    t_count = d.periods
    if t_count < 1:
        raise InputError(f"demand.periods: must be >= 1, got {t_count}")
    if not d.segment:
        raise InputError("demand.segment: give at least one [[demand.segment]]")
    ids = {pid: j for j, pid in enumerate(network.product_ids)}
    lam = np.zeros((t_count, len(d.segment)))
    sets, seen = [], {}
    for l, s in enumerate(d.segment):
        where = f"demand.segment[{l}]"
        if s.id in seen:
            raise InputError(f"{where}.id: {s.id!r} is also segment {seen[s.id]}; ids must be "
                             "unique")
        seen[s.id] = l
        for pid in s.consider:
            if pid not in ids:
                raise InputError(f"{where}.consider: unknown product {pid!r}; known: "
                                 f"{', '.join(ids)}")
        sets.append([ids[pid] for pid in s.consider])
        lam[:, l] = _arrival_column(s, where, t_count, booking_curve_table)
    worst = lam.sum(axis=1)
    over = np.flatnonzero(worst > 1.0 + ROW_SUM_SLACK)
    if over.size:
        t = int(over[0])
        raise InputError(
            f"demand.segment[*].arrival: the segments' arrival probabilities sum to "
            f"{worst[t]:.6g} > 1 in period {t}, but at most one customer arrives per period; "
            "lower them or use more periods"
        )
    return ChoiceDemand(lam, sets, [s.weights for s in d.segment],
                        [s.no_purchase for s in d.segment], network.n_products,
                        [s.id for s in d.segment])


def _arrival_column(s: SegmentSpec, where: str, t_count: int, curve: Any) -> np.ndarray:
    """One segment's arrival probability per period, from ``arrival`` or ``expected``/``shape``."""
    if (s.arrival is None) == (s.expected is None):
        raise InputError(f"{where}: give either arrival (per period) or expected with shape "
                         "(a booking curve), not both or neither")
    if s.arrival is not None:
        if s.shape is not None:
            raise InputError(f"{where}.shape: goes with expected, not with arrival")
        if isinstance(s.arrival, list):
            if len(s.arrival) != t_count:
                raise InputError(f"{where}.arrival: has {len(s.arrival)} values but "
                                 f"demand.periods = {t_count}; give one per period or one number")
            col = np.array(s.arrival, dtype=np.float64)
        else:
            col = np.full(t_count, float(s.arrival))
        bad = np.flatnonzero(~np.isfinite(col) | (col < 0) | (col > 1))
        if bad.size:
            raise InputError(f"{where}.arrival: a probability must be in [0, 1], got "
                             f"{col[bad[0]]!r}")
        return col
    m = float(s.expected)  # type: ignore[arg-type]
    if not (math.isfinite(m) and m >= 0):
        raise InputError(f"{where}.expected: mean arrivals must be finite and >= 0, got {m!r}")
    if s.shape is None or len(s.shape) != 2:
        raise InputError(f"{where}.shape: needs two beta parameters [a, b], got {s.shape!r}")
    a, b = s.shape
    if not (math.isfinite(a) and math.isfinite(b) and a > 0 and b > 0):
        raise InputError(f"{where}.shape: beta parameters must be > 0, got [{a!r}, {b!r}]")
    return curve(t_count, np.array([m]), np.array([[a, b]]))[:, 0]
