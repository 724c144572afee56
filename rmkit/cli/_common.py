"""Helpers the subcommands share: arguments, loading, JSON and table output, safe writes."""

from __future__ import annotations

import argparse
import json
import math
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from rmkit.errors import InputError

CAUTION = (
    "Results are model estimates under the stated demand model; validate them before using "
    "them to steer real sales."
)


def add_scenario(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("scenario", help="scenario .toml, or a hub-and-spoke benchmark .txt[.gz]")


def add_json(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print one JSON object on stdout")


def add_state(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--period", type=int, default=0, help="period to solve from (0-based)")
    parser.add_argument(
        "--capacity",
        default=None,
        help="seats left per leg: 'x1,x2,...' in leg order or 'LEG=x,...' (default: full)",
    )


def add_params(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--param",
        action="append",
        default=[],
        metavar="NAME=VALUE",
        help="a method setting (repeatable); VALUE is read as JSON when it parses",
    )


def parse_params(items: list[str]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for item in items:
        name, sep, raw = item.partition("=")
        if not sep or not name:
            raise InputError(f"--param: expected NAME=VALUE, got {item!r}")
        try:
            out[name] = json.loads(raw)
        except json.JSONDecodeError:
            out[name] = raw
    return out


def load(path: str):
    from rmkit.model.scenario import load_scenario

    return load_scenario(path)


def parse_state(network, demand, period: int, capacity: str | None):
    from rmkit.results import BookingState

    demand.check_period(period, "--period")
    if capacity is None:
        return BookingState(period=period)
    parts = [p.strip() for p in capacity.split(",") if p.strip()]
    if parts and all("=" in p for p in parts):
        x = [int(c) for c in network.capacities]
        for part in parts:
            leg, _, raw = part.partition("=")
            x[network.leg_index(leg.strip())] = _int(raw, "--capacity")
    else:
        x = [_int(p, "--capacity") for p in parts]
    return BookingState(period=period, capacity=tuple(network.check_capacity(x, "--capacity")))


def _int(raw: str, field: str) -> int:
    try:
        return int(raw)
    except ValueError:
        raise InputError(f"{field}: seats left must be whole numbers, got {raw!r}") from None


def jsonable(v: Any) -> Any:
    if isinstance(v, Mapping):
        return {str(k): jsonable(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [jsonable(x) for x in v]
    if isinstance(v, np.ndarray):
        return jsonable(v.tolist())
    if isinstance(v, (np.integer,)):
        return int(v)
    if isinstance(v, (float, np.floating)):
        f = float(v)
        return f if math.isfinite(f) else None
    return v


def emit_json(obj: Mapping[str, Any]) -> None:
    print(json.dumps(jsonable(obj), sort_keys=False))


def print_table(title: str, columns: list[str], rows: list[list[Any]], note: str = "") -> None:
    from rich.console import Console
    from rich.table import Table

    table = Table(title=title, title_justify="left")
    for i, col in enumerate(columns):
        table.add_column(col, justify="left" if i == 0 else "right")
    for row in rows:
        table.add_row(*[fmt(v) for v in row])
    console = Console()
    console.print(table)
    if note:
        console.print(note, style="dim")


def fmt(v: Any) -> str:
    if v is None:
        return "-"
    if isinstance(v, (float, np.floating)):
        f = float(v)
        if not math.isfinite(f):
            return "-" if math.isnan(f) else ("inf" if f > 0 else "-inf")
        return f"{f:,.2f}"
    return str(v)


def write_netcdf(ds, path: str | Path, field: str = "--out") -> Path:
    """Save a Dataset to NetCDF atomically (see :mod:`rmkit.files`), naming the option."""
    from rmkit.files import write_netcdf as write

    return write(ds, path, field)
