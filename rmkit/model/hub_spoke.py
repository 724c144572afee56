"""Reader for the public hub-and-spoke test problems.

Source of the data set: H. Topaloglu (2009), "Using Lagrangian relaxation to compute
capacity-dependent bid prices in network revenue management", Operations Research 57(3):637-649.
One hub (location 0) and N spokes; 2N legs (each spoke to and from the hub) and 2N(N+1)
products (every origin-destination pair in a cheap and an expensive class; spoke-to-spoke
products connect at the hub). The text holds four blank-line separated sections: T; the legs
(origin, destination, capacity); the products (origin, destination, class, fare); and one line
per period with ``[ o d class ]`` / probability pairs. Periods are 0-based.
"""

from __future__ import annotations

import gzip
import re
from pathlib import Path

import numpy as np

from rmkit.errors import InputError
from rmkit.model.independent import IndependentDemand
from rmkit.model.network import Leg, Network, Product

_PAIR = re.compile(r"\[\s*(\d+)\s+(\d+)\s+(\d+)\s*\]\s+([0-9eE.+-]+)")


def leg_id(o: int, d: int) -> str:
    return f"{o}-{d}"


def _place(location: int) -> str:
    """A readable name for figures and tables: location 0 is the hub."""
    return "hub" if location == 0 else f"spoke {location}"


def product_id(o: int, d: int, fare_class: int) -> str:
    return f"{o}-{d}-{fare_class}"


def _read_text(path: Path) -> str:
    try:
        if path.name.lower().endswith(".gz"):
            with gzip.open(path, "rt", encoding="utf-8") as fh:
                return fh.read()
        return path.read_text(encoding="utf-8")
    except (OSError, EOFError, UnicodeDecodeError) as err:
        raise InputError(f"cannot read the benchmark text ({err}); is it a .txt or .txt.gz?") from None


def _sections(text: str) -> list[list[tuple[int, str]]]:
    """Numbered non-comment lines grouped into blank-line separated sections."""
    sections: list[list[tuple[int, str]]] = []
    current: list[tuple[int, str]] = []
    for number, raw in enumerate(text.splitlines(), start=1):
        line = raw.strip()
        if line.startswith("#"):
            continue
        if not line:
            if current:
                sections.append(current)
                current = []
            continue
        current.append((number, line))
    if current:
        sections.append(current)
    return sections


def parse_hub_spoke(text: str, name: str = "") -> tuple[Network, IndependentDemand]:
    """Parse the benchmark text into the network and its (independent) demand model."""
    sec = _sections(text)
    if len(sec) < 4:
        raise InputError(
            f"expected 4 sections (periods, legs, products, probabilities), found {len(sec)}"
        )

    def ints(line: tuple[int, str], k: int, what: str) -> list[int]:
        number, body = line
        parts = body.split()
        try:
            values = [int(v) for v in parts[:k]]
        except ValueError:
            raise InputError(f"line {number}: {what} must be whole numbers, got {body!r}") from None
        if len(values) != k:
            raise InputError(f"line {number}: {what} needs {k} fields, got {body!r}")
        return values

    (n_periods,) = ints(sec[0][0], 1, "the number of periods")
    (n_legs,) = ints(sec[1][0], 1, "the number of legs")
    if len(sec[1]) - 1 != n_legs:
        raise InputError(f"line {sec[1][0][0]}: says {n_legs} legs but {len(sec[1]) - 1} follow")
    legs = []
    for line in sec[1][1:]:
        o, d, cap = ints(line, 3, "a leg (origin destination capacity)")
        legs.append(Leg(id=leg_id(o, d), capacity=cap, name=f"{_place(o)} to {_place(d)}"))
    (n_products,) = ints(sec[2][0], 1, "the number of products")
    if len(sec[2]) - 1 != n_products:
        raise InputError(
            f"line {sec[2][0][0]}: says {n_products} products but {len(sec[2]) - 1} follow"
        )
    leg_ids = {leg.id for leg in legs}
    products = []
    index: dict[tuple[int, int, int], int] = {}
    for number, body in sec[2][1:]:
        parts = body.split()
        if len(parts) != 4:
            raise InputError(f"line {number}: a product needs origin destination class fare")
        try:
            o, d, c, fare = int(parts[0]), int(parts[1]), int(parts[2]), float(parts[3])
        except ValueError:
            raise InputError(f"line {number}: cannot read product {body!r}") from None
        path = (leg_id(o, d),) if 0 in (o, d) else (leg_id(o, 0), leg_id(0, d))
        for lid in path:
            if lid not in leg_ids:
                raise InputError(f"line {number}: product {body!r} needs leg {lid!r}, not listed")
        index[(o, d, c)] = len(products)
        products.append(
            Product(
                id=product_id(o, d, c),
                fare=fare,
                legs=path,
                name=f"{o} to {d} class {c}",
                fare_class=str(c),
                origin=str(o),
                destination=str(d),
            )
        )
    network = Network(legs=tuple(legs), products=tuple(products), name=name)

    p = np.zeros((n_periods, len(products)))
    for number, body in (line for s in sec[3:] for line in s):
        head, _, rest = body.partition(" ")
        head = head.split("\t")[0]
        try:
            t = int(head)
        except ValueError:
            raise InputError(f"line {number}: a probability line starts with its period") from None
        if not 0 <= t < n_periods:
            raise InputError(
                f"line {number}: period index {t} out of range [0, {n_periods - 1}]"
            )
        for o, d, c, prob in _PAIR.findall(body[len(head):]):
            key = (int(o), int(d), int(c))
            if key not in index:
                raise InputError(f"line {number}: unknown product [ {o} {d} {c} ]")
            p[t, index[key]] = float(prob)
    try:
        demand = IndependentDemand(p)
    except InputError as err:
        raise InputError(f"probabilities: {err}") from None
    return network, demand


def read_hub_spoke(path: str | Path) -> tuple[Network, IndependentDemand]:
    """Read ``rm_<T>_<N>_<alpha>_<kappa>.txt[.gz]`` into its network (named after the file) and
    demand; :func:`rmkit.model.scenario.load_scenario` wraps them in a scenario."""
    p = Path(path)
    return parse_hub_spoke(_read_text(p), name=instance_label(p))


def instance_label(path: str | Path) -> str:
    """The file name without ``.txt`` / ``.txt.gz``."""
    name = Path(path).name
    for suffix in (".gz", ".txt"):
        if name.lower().endswith(suffix):
            name = name[: -len(suffix)]
    return name


def parse_instance_name(name: str) -> dict[str, float]:
    """``rm_200_4_1.0_4.0`` -> periods, spokes, alpha, kappa as numbers."""
    m = re.match(r"rm_(\d+)_(\d+)_(\d+(?:\.\d+)?)_(\d+(?:\.\d+)?)", Path(name).name)
    if not m:
        raise InputError(f"{name!r} is not named rm_<T>_<N>_<alpha>_<kappa>")
    return {
        "periods": int(m.group(1)),
        "spokes": int(m.group(2)),
        "alpha": float(m.group(3)),
        "kappa": float(m.group(4)),
    }
