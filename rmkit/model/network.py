"""The network: legs with integer capacities, products with fares, and the incidence matrix.

A product j uses a set of legs; the 0/1 incidence matrix ``A`` has ``A[i, j] = 1`` when product j
needs one seat on leg i. Every solver in rmkit reads the network only through this class.

>>> net = Network.build(
...     legs=[("AB", 2), ("BC", 1)],
...     products=[("AB-Y", 100.0, ["AB"]), ("AC-Y", 150.0, ["AB", "BC"])],
... )
>>> net.incidence.tolist()
[[1, 1], [0, 1]]
>>> net.state_space_size
6
"""

from __future__ import annotations

import math
import unicodedata
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, field

import numpy as np

from rmkit.errors import InputError, ProblemTooLargeError, quoted
from rmkit.limits import MAX_COUNT, MAX_FARE


@dataclass(frozen=True)
class Leg:
    """One resource (a flight leg, a train segment, a room night) with a whole-number capacity."""

    id: str
    capacity: int
    name: str = ""


@dataclass(frozen=True)
class Product:
    """Something sold: a fare on a path of one or more legs."""

    id: str
    fare: float
    legs: tuple[str, ...]
    name: str = ""
    fare_class: str = ""
    origin: str = ""
    destination: str = ""


def padded_rows(mask: np.ndarray) -> np.ndarray:
    """Row r lists the columns where ``mask[r]`` is non-zero, ascending, padded with -1 (at
    least one column, so a kernel can always index it). ``padded_rows(network.incidence.T)``:
    each product's legs; ``padded_rows(network.incidence)``: each leg's products."""
    nonzero = np.asarray(mask) != 0
    counts = nonzero.sum(axis=1)
    out = np.full((nonzero.shape[0], max(int(counts.max(initial=0)), 1)), -1, dtype=np.int64)
    row, col = np.nonzero(nonzero)  # by row, then by column ascending
    out[row, np.arange(row.size) - (np.cumsum(counts) - counts)[row]] = col
    return out


def grid_strides(capacities: np.ndarray) -> np.ndarray:
    """Row-major strides over the state grid ``(c_0+1, ..., c_{m-1}+1)``, last leg stride 1:
    the flat index of seats left x is ``sum_i x_i * stride_i`` (exact DP, stored policies)."""
    sizes = [int(c) + 1 for c in np.asarray(capacities).ravel()]
    strides = [1] * len(sizes)
    for i in range(len(sizes) - 2, -1, -1):  # Python integers: no silent wrap-around
        strides[i] = strides[i + 1] * sizes[i + 1]
    total = strides[0] * sizes[0] if sizes else 1
    if total > np.iinfo(np.int64).max:
        raise ProblemTooLargeError(
            f"capacities: the state grid has {total:,} states, more than 64-bit flat indices "
            "hold; state-by-state methods and traces cannot run on this network"
        )
    return np.array(strides, dtype=np.int64)


def _check_id(value: object, field: str) -> None:
    """Ids are non-empty text without control characters: they label result files (NetCDF
    cannot store a NUL) and messages (a newline would split the one line)."""
    if not isinstance(value, str) or not value:
        raise InputError(f"{field}: must be a non-empty string, got {value!r}")
    if any(unicodedata.category(ch) == "Cc" for ch in value):
        raise InputError(f"{field}: must not contain control characters (newline, tab, NUL, ...), "
                         f"got {value!r}")


def _readonly(a: np.ndarray) -> np.ndarray:
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class Network:
    """Legs, products and the leg-by-product incidence matrix; validated once, then read-only."""

    legs: tuple[Leg, ...]
    products: tuple[Product, ...]
    name: str = ""
    incidence: np.ndarray = field(init=False, repr=False)
    capacities: np.ndarray = field(init=False, repr=False)
    fares: np.ndarray = field(init=False, repr=False)

    def __post_init__(self) -> None:
        if not self.legs:
            raise InputError("leg: a network needs at least one leg; add a [[leg]] entry")
        if not self.products:
            raise InputError("product: a network needs at least one product; add a [[product]]")
        index: dict[str, int] = {}
        for i, leg in enumerate(self.legs):
            where = f"leg[{i}]"
            _check_id(leg.id, f"{where}.id")
            if leg.id in index:
                raise InputError(f"{where}.id: duplicate leg id {leg.id!r}; leg ids must be unique")
            cap = leg.capacity
            if (isinstance(cap, bool) or not isinstance(cap, (int, np.integer))
                    or not 0 <= cap <= MAX_COUNT):
                raise InputError(
                    f"{where}.capacity: must be a whole number in [0, {MAX_COUNT}], got {cap!r} "
                    f"(leg {leg.id!r}); give a non-negative integer seat count"
                )
            index[leg.id] = i
        seen: set[str] = set()
        a = np.zeros((len(self.legs), len(self.products)), dtype=np.int64)
        for j, prod in enumerate(self.products):
            where = f"product[{j}]"
            _check_id(prod.id, f"{where}.id")
            if prod.id in seen:
                raise InputError(f"{where}.id: duplicate product id {prod.id!r}; ids must be unique")
            seen.add(prod.id)
            fare = prod.fare
            if (
                isinstance(fare, bool)
                or not isinstance(fare, (int, float, np.floating, np.integer))
                or not math.isfinite(float(fare))
                or not 0 < float(fare) <= MAX_FARE
            ):
                raise InputError(
                    f"{where}.fare: must be a finite number > 0 and <= {MAX_FARE:g}, got {fare!r} "
                    f"(product {prod.id!r}); give a positive fare"
                )
            if not prod.legs:
                raise InputError(f"{where}.legs: product {prod.id!r} uses no leg; list its legs")
            for leg_id in prod.legs:
                if leg_id not in index:
                    raise InputError(
                        f"{where}.legs: product {prod.id!r} uses unknown leg {leg_id!r}; "
                        f"known legs: {quoted(index)}"
                    )
                if a[index[leg_id], j]:
                    raise InputError(
                        f"{where}.legs: product {prod.id!r} lists leg {leg_id!r} twice"
                    )
                a[index[leg_id], j] = 1
        object.__setattr__(self, "incidence", _readonly(a))
        object.__setattr__(
            self,
            "capacities",
            _readonly(np.array([int(leg.capacity) for leg in self.legs], dtype=np.int64)),
        )
        object.__setattr__(
            self,
            "fares",
            _readonly(np.array([float(p.fare) for p in self.products], dtype=np.float64)),
        )

    @classmethod
    def build(
        cls,
        legs: Iterable[tuple[str, int]],
        products: Iterable[tuple[str, float, Sequence[str]]],
        name: str = "",
    ) -> Network:
        """Shorthand constructor from ``(id, capacity)`` and ``(id, fare, legs)`` tuples."""
        return cls(
            legs=tuple(Leg(id=i, capacity=c) for i, c in legs),
            products=tuple(Product(id=i, fare=f, legs=tuple(ls)) for i, f, ls in products),
            name=name,
        )

    @property
    def n_legs(self) -> int:
        return len(self.legs)

    @property
    def n_products(self) -> int:
        return len(self.products)

    @property
    def leg_ids(self) -> list[str]:
        return [leg.id for leg in self.legs]

    @property
    def product_ids(self) -> list[str]:
        return [p.id for p in self.products]

    def leg_index(self, leg_id: str) -> int:
        for i, leg in enumerate(self.legs):
            if leg.id == leg_id:
                return i
        raise InputError(f"leg: unknown leg id {leg_id!r}; legs are {quoted(self.leg_ids)}")

    def product_legs(self, j: int) -> np.ndarray:
        """Indices of the legs product ``j`` uses."""
        return np.flatnonzero(self.incidence[:, j])

    @property
    def max_capacity(self) -> int:
        return int(self.capacities.max())

    @property
    def state_space_size(self) -> int:
        """Number of capacity vectors 0 <= x <= c, the exact network DP's state count."""
        return math.prod(int(c) + 1 for c in self.capacities)

    def check_capacity(self, capacity: Sequence[int] | np.ndarray, field_name: str) -> np.ndarray:
        """Validate a remaining-capacity vector against this network; return it as int64."""
        x = np.asarray(capacity)
        if x.shape != (self.n_legs,):
            raise InputError(
                f"{field_name}: needs one remaining capacity per leg ({self.n_legs}), "
                f"got shape {x.shape}"
            )
        if not np.issubdtype(x.dtype, np.integer):
            if not np.all(np.isfinite(x)) or np.any(x != np.round(x)):
                raise InputError(f"{field_name}: remaining capacities must be whole numbers")
        x = x.astype(np.int64)
        bad = np.flatnonzero((x < 0) | (x > self.capacities))
        if bad.size:
            i = int(bad[0])
            raise InputError(
                f"{field_name}[{i}]: remaining capacity of leg {self.legs[i].id!r} must be in "
                f"[0, {int(self.capacities[i])}], got {int(x[i])}"
            )
        return x
