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
import math
import re
from pathlib import Path

import numpy as np

from rmkit.errors import InputError
from rmkit.limits import MAX_COUNT
from rmkit.model.independent import IndependentDemand, check_table_size
from rmkit.model.network import Leg, Network, Product

#: One ``[ origin destination class ] probability`` pair of a probability line, anchored where
#: the previous pair ended: anything between pairs is an error, never skipped.
_PAIR = re.compile(r"\s*\[\s*(\d+)\s+(\d+)\s+(\d+)\s*\]\s+(\S+)")

Line = tuple[int, str]


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
            with gzip.open(path, "rt", encoding="utf-8-sig") as fh:
                return fh.read()
        return path.read_text(encoding="utf-8-sig")
    except (OSError, EOFError, UnicodeDecodeError) as err:
        raise InputError(f"cannot read the benchmark text ({err}); is it a .txt or .txt.gz?") from None


def _sections(text: str) -> list[list[Line]]:
    """Numbered non-comment lines grouped into blank-line separated sections."""
    sections: list[list[Line]] = []
    current: list[Line] = []
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


def _whole(line: Line, k: int, what: str, low: int = 0, high: int = MAX_COUNT) -> list[int]:
    """Exactly ``k`` whole numbers in ``[low, high]`` on ``line``; extra fields are an error."""
    number, body = line
    parts = body.split()
    if len(parts) != k:
        raise InputError(f"line {number}: {what} needs exactly {k} field{'s' * (k > 1)}, got "
                         f"{body!r}")
    try:
        values = [int(v) for v in parts]
    except ValueError:
        raise InputError(f"line {number}: {what} must be whole numbers, got {body!r}") from None
    for v in values:
        if not low <= v <= high:
            raise InputError(f"line {number}: {what}: {v} is out of range [{low}, {high}]")
    return values


def _counted(section: list[Line], what: str) -> tuple[int, list[Line]]:
    """The count on a section's first line and the lines after it, which must be that many."""
    (count,) = _whole(section[0], 1, f"the number of {what}", low=1)
    rows = section[1:]
    if len(rows) != count:
        raise InputError(f"line {section[0][0]}: says {count} {what} but {len(rows)} follow")
    return count, rows


def parse_hub_spoke(text: str, name: str = "") -> tuple[Network, IndependentDemand]:
    """Parse the benchmark text into the network and its (independent) demand model.

    Every count the file declares is checked: one periods line, the legs and products it
    announces, and exactly one probability line per period listing every product once.
    """
    sec = _sections(text)
    if len(sec) < 4:
        raise InputError(
            f"expected 4 sections (periods, legs, products, probabilities), found {len(sec)}"
        )
    if len(sec[0]) != 1:
        raise InputError(f"line {sec[0][1][0]}: the periods section holds one number, the "
                         "number of periods; a blank line must follow it")
    (n_periods,) = _whole(sec[0][0], 1, "the number of periods", low=1)
    _, leg_rows = _counted(sec[1], "legs")
    legs = []
    for line in leg_rows:
        o, d, cap = _whole(line, 3, "a leg (origin destination capacity)")
        legs.append(Leg(id=leg_id(o, d), capacity=cap, name=f"{_place(o)} to {_place(d)}"))
    _, product_rows = _counted(sec[2], "products")
    leg_ids = {leg.id for leg in legs}
    products = []
    index: dict[tuple[int, int, int], int] = {}
    for number, body in product_rows:
        parts = body.split()
        if len(parts) != 4:
            raise InputError(f"line {number}: a product needs exactly 4 fields (origin destination "
                             f"class fare), got {body!r}")
        try:
            o, d, c, fare = int(parts[0]), int(parts[1]), int(parts[2]), float(parts[3])
        except ValueError:
            raise InputError(f"line {number}: cannot read product {body!r}") from None
        path = (leg_id(o, d),) if 0 in (o, d) else (leg_id(o, 0), leg_id(0, d))
        for lid in path:
            if lid not in leg_ids:
                raise InputError(f"line {number}: product {body!r} needs leg {lid!r}, not listed")
        if (o, d, c) in index:
            raise InputError(f"line {number}: product [ {o} {d} {c} ] is listed twice")
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
    try:
        network = Network(legs=tuple(legs), products=tuple(products), name=name)
    except InputError as err:  # name the line of the leg or product the message is about
        raise InputError(f"{_line_of(str(err), leg_rows, product_rows)}{err}") from None
    check_table_size(n_periods, len(products), f"line {sec[0][0][0]}: the number of periods")
    p = np.zeros((n_periods, len(products)))
    seen: dict[int, int] = {}
    for number, body in (line for s in sec[3:] for line in s):
        t = _probability_line(number, body, n_periods, index, p)
        if t in seen:
            raise InputError(f"line {number}: period {t} is listed again (first on line "
                             f"{seen[t]}); give one probability line per period")
        seen[t] = number
    if len(seen) != n_periods:
        missing = next(t for t in range(n_periods) if t not in seen)
        raise InputError(f"expected one probability line per period ({n_periods}), found "
                         f"{len(seen)}; period {missing} is missing (is the file cut short?)")
    try:
        demand = IndependentDemand(p)
    except InputError as err:
        raise InputError(f"probabilities: {err}") from None
    return network, demand


def _line_of(message: str, leg_rows: list[Line], product_rows: list[Line]) -> str:
    """``line N: `` for a Network message about ``leg[i]`` or ``product[j]``, else ``""``."""
    m = re.match(r"(leg|product)\[(\d+)\]", message)
    if not m:
        return ""
    rows = leg_rows if m.group(1) == "leg" else product_rows
    return f"line {rows[int(m.group(2))][0]}: "


def _probability_line(number: int, body: str, n_periods: int,
                      index: dict[tuple[int, int, int], int], p: np.ndarray) -> int:
    """Read one ``period [ o d c ] prob ...`` line into row ``period`` of ``p``; return the period."""
    head = body.split(None, 1)[0]
    try:
        t = int(head)
    except ValueError:
        raise InputError(f"line {number}: a probability line starts with its period, got "
                         f"{head!r}") from None
    if not 0 <= t < n_periods:
        raise InputError(f"line {number}: period index {t} out of range [0, {n_periods - 1}]")
    pos, listed = len(head), set()
    rest = body.rstrip()
    while pos < len(rest):
        m = _PAIR.match(rest, pos)
        if m is None:
            raise InputError(f"line {number}: expected '[ origin destination class ] probability' "
                             f"at {rest[pos:pos + 30].strip()!r}")
        o, d, c, raw = m.groups()
        key = (int(o), int(d), int(c))
        if key not in index:
            raise InputError(f"line {number}: unknown product [ {o} {d} {c} ]")
        if key in listed:
            raise InputError(f"line {number}: product [ {o} {d} {c} ] is listed twice")
        try:
            prob = float(raw)
        except ValueError:
            prob = math.nan
        if not 0.0 <= prob <= 1.0:  # also refuses nan
            raise InputError(f"line {number}: probability of [ {o} {d} {c} ] must be a number in "
                             f"[0, 1], got {raw!r}")
        listed.add(key)
        p[t, index[key]] = prob
        pos = m.end()
    if len(listed) != len(index):
        absent = next(k for k in index if k not in listed)
        raise InputError(f"line {number}: period {t} lists {len(listed)} of the {len(index)} "
                         f"products; [ {absent[0]} {absent[1]} {absent[2]} ] is missing")
    return t


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
