"""Scenario files: rmkit's own TOML layout for a network, its demand and run defaults.

Layout (every table and key; unknown keys are refused)::

    [scenario]            name, description (optional)
    [defaults]            seed, paths, resolve (all optional)
    [[leg]]               id, capacity, name (optional)
    [[product]]           id, fare, legs = [leg ids], name, fare_class, origin, destination
    [demand]              periods, then exactly one of:
      [[demand.curve]]      product, expected, shape = [a, b]   (beta booking curve)
      probabilities         dense table, one row per period, one column per product
      [[demand.request]]    period, product, probability        (sparse table)

The README documents the layout with the bundled example. :func:`load_scenario` also reads the
public hub-and-spoke benchmark text files (``.txt`` or ``.txt.gz``).
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from pydantic import BaseModel, ConfigDict, ValidationError

from rmkit.errors import InputError
from rmkit.model.demand import DemandModel, check_compatible
from rmkit.model.network import Leg, Network, Product


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)


class ScenarioInfo(_Strict):
    name: str = ""
    description: str = ""


class Defaults(_Strict):
    seed: int | None = None
    paths: int | None = None
    resolve: int | None = None


class LegSpec(_Strict):
    id: str
    capacity: int
    name: str = ""


class ProductSpec(_Strict):
    id: str
    fare: float
    legs: list[str]
    name: str = ""
    fare_class: str = ""
    origin: str = ""
    destination: str = ""


class CurveSpec(_Strict):
    product: str
    expected: float
    shape: list[float]


class RequestSpec(_Strict):
    period: int
    product: str
    probability: float


class DemandSpec(_Strict):
    periods: int
    curve: list[CurveSpec] | None = None
    probabilities: list[list[float]] | None = None
    request: list[RequestSpec] | None = None


class ScenarioSpec(_Strict):
    scenario: ScenarioInfo = ScenarioInfo()
    defaults: Defaults = Defaults()
    leg: list[LegSpec]
    product: list[ProductSpec]
    demand: DemandSpec


@dataclass(frozen=True, eq=False)
class Scenario:
    """A loaded scenario: the network, its demand model, run defaults and where it came from."""

    network: Network
    demand: DemandModel
    spec: ScenarioSpec
    source: str = ""

    @property
    def name(self) -> str:
        return self.spec.scenario.name or Path(self.source).name

    @property
    def default_seed(self) -> int:
        return 0 if self.spec.defaults.seed is None else self.spec.defaults.seed

    @property
    def default_paths(self) -> int:
        return 1000 if self.spec.defaults.paths is None else self.spec.defaults.paths


# ------------------------------------------------------------------ building
def _loc(loc: tuple[Any, ...]) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += ("." if out else "") + str(part)
    return out


_FIELD_HELP = {
    "int_type": "must be a whole number",
    "float_type": "must be a number",
    "string_type": "must be a string",
    "list_type": "must be a list",
    "missing": "is required but missing",
    "bool_type": "must be true or false",
}


def _pydantic_message(err: ValidationError) -> str:
    first = err.errors()[0]
    loc = tuple(p for p in first["loc"] if not (isinstance(p, str) and p.startswith("function")))
    kind = first["type"]
    if kind == "extra_forbidden":
        parent, name = loc[:-1], loc[-1]
        model = _model_at(parent)
        valid = ", ".join(model.model_fields) if model else "see the README"
        where = _loc(parent) or "top level"
        return f"{where}: unknown field {name!r}; valid fields: {valid}"
    rule = _FIELD_HELP.get(kind, first["msg"])
    got = first.get("input")
    return f"{_loc(loc)}: {rule}, got {got!r}" if kind != "missing" else f"{_loc(loc)}: {rule}"


def _model_at(loc: tuple[Any, ...]) -> type[BaseModel] | None:
    model: type[BaseModel] | None = ScenarioSpec
    for part in loc:
        if isinstance(part, int) or model is None:
            continue
        field = model.model_fields.get(str(part))
        if field is None:
            return None
        ann = field.annotation
        model = _inner_model(ann)
    return model


def _inner_model(ann: Any) -> type[BaseModel] | None:
    if isinstance(ann, type) and issubclass(ann, BaseModel):
        return ann
    for arg in getattr(ann, "__args__", ()) or ():
        found = _inner_model(arg)
        if found is not None:
            return found
    return None


def network_from_spec(spec: ScenarioSpec) -> Network:
    legs = tuple(Leg(id=s.id, capacity=s.capacity, name=s.name) for s in spec.leg)
    products = tuple(
        Product(
            id=s.id,
            fare=s.fare,
            legs=tuple(s.legs),
            name=s.name,
            fare_class=s.fare_class,
            origin=s.origin,
            destination=s.destination,
        )
        for s in spec.product
    )
    return Network(legs=legs, products=products, name=spec.scenario.name)


def demand_from_spec(spec: ScenarioSpec, network: Network) -> DemandModel:
    d = spec.demand
    n = network.n_products
    given = [k for k in ("curve", "probabilities", "request") if getattr(d, k) is not None]
    if len(given) != 1:
        raise InputError(
            "demand: give exactly one of [[demand.curve]], demand.probabilities or "
            f"[[demand.request]]; got {', '.join(given) or 'none'}"
        )
    if d.periods < 1:
        raise InputError(f"demand.periods: must be >= 1, got {d.periods}")
    ids = {pid: j for j, pid in enumerate(network.product_ids)}

    def product_index(where: str, pid: str) -> int:
        if pid not in ids:
            raise InputError(f"{where}.product: unknown product {pid!r}; known: {', '.join(ids)}")
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
        return DemandModel.from_booking_curves(d.periods, m, shapes)
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
        return DemandModel(np.array(rows, dtype=np.float64))
    p = np.zeros((d.periods, n))
    for k, r in enumerate(d.request or []):
        if not 0 <= r.period < d.periods:
            raise InputError(
                f"demand.request[{k}].period: period index must be in [0, {d.periods - 1}], "
                f"got {r.period}"
            )
        j = product_index(f"demand.request[{k}]", r.product)
        p[r.period, j] += r.probability
    from rmkit.model.demand import check_probability_table

    check_probability_table(p, "demand.request")
    return DemandModel(p)


def scenario_from_dict(data: dict[str, Any], source: str = "") -> Scenario:
    try:
        spec = ScenarioSpec.model_validate(data)
    except ValidationError as err:
        raise InputError(_pydantic_message(err)) from None
    network = network_from_spec(spec)
    demand = demand_from_spec(spec, network)
    check_compatible(network, demand)
    return Scenario(network=network, demand=demand, spec=spec, source=source)


# ------------------------------------------------------------------ files
def _prefixed(path: Path, err: InputError) -> InputError:
    return type(err)(f"{path}: {err}")


def load_scenario(path: str | Path) -> Scenario:
    """Read a scenario TOML or a hub-and-spoke benchmark file (``.txt`` / ``.txt.gz``)."""
    p = Path(path)
    if not p.exists():
        raise InputError(f"{p}: no such file; give the path of a scenario .toml or benchmark .txt")
    if p.is_dir():
        raise InputError(f"{p}: is a folder; give the path of a scenario file")
    name = p.name.lower()
    try:
        if name.endswith((".txt", ".txt.gz")):
            from rmkit.model.hub_spoke import read_hub_spoke

            return read_hub_spoke(p)
        try:
            data = tomllib.loads(p.read_text(encoding="utf-8"))
        except tomllib.TOMLDecodeError as err:
            raise InputError(f"malformed TOML: {err}; fix the syntax at that line") from None
        except UnicodeDecodeError:
            raise InputError("not a UTF-8 text file; give a scenario .toml") from None
        return scenario_from_dict(data, source=str(p))
    except InputError as err:
        raise _prefixed(p, err) from None


def scenario_to_dict(scenario: Scenario) -> dict[str, Any]:
    return scenario.spec.model_dump(exclude_none=True, exclude_defaults=False)


def save_scenario(scenario: Scenario, path: str | Path) -> None:
    """Write the scenario's TOML; loading it back gives the same network and demand."""
    import tomli_w

    text = tomli_w.dumps(_strip_empty(scenario_to_dict(scenario)))
    Path(path).write_text(text, encoding="utf-8")


def _strip_empty(d: Any) -> Any:
    if isinstance(d, dict):
        return {k: _strip_empty(v) for k, v in d.items() if v not in ("", None, {})}
    if isinstance(d, list):
        return [_strip_empty(v) for v in d]
    return d


def spec_from_model(network: Network, demand: DemandModel, name: str = "") -> ScenarioSpec:
    """A scenario spec (dense probability table) for a network and demand built in code."""
    return ScenarioSpec(
        scenario=ScenarioInfo(name=name or network.name),
        leg=[LegSpec(id=leg.id, capacity=int(leg.capacity), name=leg.name) for leg in network.legs],
        product=[
            ProductSpec(
                id=p.id,
                fare=float(p.fare),
                legs=list(p.legs),
                name=p.name,
                fare_class=p.fare_class,
                origin=p.origin,
                destination=p.destination,
            )
            for p in network.products
        ],
        demand=DemandSpec(
            periods=demand.n_periods,
            probabilities=[[float(v) for v in row] for row in demand.probabilities],
        ),
    )


def scenario_from_model(network: Network, demand: DemandModel, name: str = "") -> Scenario:
    spec = spec_from_model(network, demand, name)
    return Scenario(network=network, demand=demand, spec=spec, source=name)
