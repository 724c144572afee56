"""Scenario files: rmkit's own TOML layout for a network, its demand and run defaults.

Layout (every table and key; unknown keys are refused)::

    [scenario]            name, description (optional)
    [defaults]            seed, paths, resolve (all optional)
    [[leg]]               id, capacity, name (optional)
    [[product]]           id, fare, legs = [leg ids], name, fare_class, origin, destination
    [demand]              periods, then the tables of exactly one demand kind; independent
                          demand (rmkit.model.independent) takes exactly one of:
      [[demand.curve]]      product, expected, shape = [a, b]   (beta booking curve)
      probabilities         dense table, one row per period, one column per product
      [[demand.request]]    period, product, probability        (sparse table)

Each demand kind reads and writes its own tables (``DemandModel.from_spec`` / ``to_spec``), so a
new kind adds its tables without touching this module.

The README documents the layout with the bundled example. :func:`load_scenario` also reads the
public hub-and-spoke benchmark text files (``.txt`` or ``.txt.gz``).
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from rmkit.errors import InputError
from rmkit.limits import MAX_COUNT, MAX_SEED
from rmkit.model.demand import DemandModel, check_compatible, demand_kinds
from rmkit.model.network import Leg, Network, Product
from rmkit.model.spec_errors import pydantic_message


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)


class ScenarioInfo(_Strict):
    name: str = ""
    description: str = ""


#: Whole numbers in a range (pydantic checks them; spec_errors words the message).
Seed = Annotated[int, Field(ge=0, le=MAX_SEED)]
Count = Annotated[int, Field(ge=0, le=MAX_COUNT)]
PositiveCount = Annotated[int, Field(ge=1, le=MAX_COUNT)]


class Defaults(_Strict):
    seed: Seed | None = None
    paths: PositiveCount | None = None
    resolve: Count | None = None


class LegSpec(_Strict):
    id: str
    capacity: Count
    name: str = ""


class ProductSpec(_Strict):
    id: str
    fare: float
    legs: list[str]
    name: str = ""
    fare_class: str = ""
    origin: str = ""
    destination: str = ""


class ScenarioSpec(_Strict):
    scenario: ScenarioInfo = ScenarioInfo()
    defaults: Defaults = Defaults()
    leg: list[LegSpec]
    product: list[ProductSpec]
    demand: dict[str, Any]


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


def demand_kind_for(table: dict[str, Any]) -> type[DemandModel]:
    """The demand kind whose keys the ``[demand]`` table uses; exactly one kind may be given."""
    kinds = demand_kinds()
    keys = [k for k in table if k != "periods"]
    matches = {name: [k for k in keys if k in cls.spec_keys] for name, cls in kinds.items()}
    used = {name: found for name, found in matches.items() if found}
    if len(used) > 1:
        parts = "; ".join(f"{', '.join(found)} for {name} demand" for name, found in used.items())
        raise InputError(f"demand: mixes tables of different demand kinds ({parts}); a scenario "
                         "has one demand kind: keep the tables of one")
    if not used:
        forms = "; ".join(f"{name}: {', '.join(cls.spec_keys)}" for name, cls in kinds.items())
        unknown = [k for k in keys if all(k not in c.spec_keys for c in kinds.values())]
        extra = f"unknown field {unknown[0]!r}; " if unknown else ""
        raise InputError(f"demand: {extra}give the demand in one of the forms ({forms})")
    return kinds[next(iter(used))]


def demand_from_spec(spec: ScenarioSpec, network: Network) -> DemandModel:
    table = dict(spec.demand)
    if "periods" not in table:
        raise InputError("demand.periods: is required but missing")
    return demand_kind_for(table).from_spec(table, network)


def scenario_from_dict(data: dict[str, Any], source: str = "") -> Scenario:
    try:
        spec = ScenarioSpec.model_validate(data)
    except ValidationError as err:
        raise InputError(pydantic_message(err, ScenarioSpec)) from None
    network = network_from_spec(spec)
    demand = demand_from_spec(spec, network)
    check_compatible(network, demand)
    check_defaults(spec.defaults, demand.n_periods)
    return Scenario(network=network, demand=demand, spec=spec, source=source)


def check_defaults(defaults: Defaults, n_periods: int) -> None:
    """Rules of ``[defaults]`` that need the demand: at most one re-solve per period."""
    if defaults.resolve is not None and defaults.resolve > n_periods:
        raise InputError(f"defaults.resolve: must be at most the number of periods ({n_periods}), "
                         f"got {defaults.resolve}")


# ------------------------------------------------------------------ files
def _prefixed(path: Path, err: InputError) -> InputError:
    return type(err)(f"{path}: {err}")


def load_scenario(path: str | Path) -> Scenario:
    """Read a scenario TOML or a hub-and-spoke benchmark file (``.txt`` / ``.txt.gz``)."""
    from rmkit.files import check_input, read_text

    p = Path(path)
    if not p.exists():  # a public benchmark named alone: the copy shipped with rmkit
        from rmkit.model.benchmarks import instance_path

        p = instance_path(p) or p
    p = check_input(p, "scenario .toml or benchmark .txt")
    try:
        if p.name.lower().endswith((".txt", ".txt.gz")):
            from rmkit.model.hub_spoke import read_hub_spoke

            network, demand = read_hub_spoke(p)
            return scenario_from_model(network, demand, network.name, source=str(p))
        text = read_text(p, "scenario .toml")
        try:
            data = tomllib.loads(text)
        except tomllib.TOMLDecodeError as err:
            raise InputError(f"malformed TOML: {err}; fix the syntax at that line") from None
        if "csv" in data:  # network or forecast kept in CSV files beside the TOML
            from rmkit.model.csv_forecast import scenario_from_csv_tables

            return scenario_from_csv_tables(data, p, scenario_from_dict)
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
        demand=demand.to_spec(network),
    )


def scenario_from_model(network: Network, demand: DemandModel, name: str = "",
                        source: str = "") -> Scenario:
    spec = spec_from_model(network, demand, name)
    return Scenario(network=network, demand=demand, spec=spec, source=source or name)
