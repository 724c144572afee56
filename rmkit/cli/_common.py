"""Helpers the subcommands share: arguments, loading, JSON and table output, safe writes."""

from __future__ import annotations

import argparse
import json
import math
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np

from rmkit.errors import InputError, quoted
from rmkit.limits import MAX_COUNT, MAX_SEED, whole_rule

CAUTION = (
    "Results are model estimates under the stated demand model; validate them before using "
    "them to steer real sales."
)


# ---------------------------------------------------------------- parsing options
#: Range of each whole-number option (any other ``type=int`` option: a whole number >= 0).
WHOLE_OPTIONS: dict[str, tuple[int, int]] = {
    "--seed": (0, MAX_SEED), "--fresh-seed": (0, MAX_SEED),
    "--paths": (1, MAX_COUNT), "--visit-paths": (1, MAX_COUNT), "--samples": (1, MAX_COUNT),
    "--workers": (1, MAX_COUNT), "--periods": (1, MAX_COUNT), "--spokes": (1, MAX_COUNT),
    "--legs": (1, MAX_COUNT), "--classes": (1, MAX_COUNT),
}
#: Options whose values may start with '-' (a negative capacity is refused by its rule, not
#: mistaken for an option).
NEGATIVE_LOOKING = ("--capacity",)


class Parser(argparse.ArgumentParser):
    """argparse with rmkit's rules: a bad option is one line (an :class:`InputError`, printed
    like every other), whole-number options are checked against their range
    (:data:`WHOLE_OPTIONS`) and number options must be finite. Subcommands inherit the class."""

    def add_argument(self, *names: Any, **kwargs: Any) -> argparse.Action:
        if kwargs.get("type") is int:
            kwargs["type"] = whole_option(*WHOLE_OPTIONS.get(names[0], (0, MAX_COUNT)))
        elif kwargs.get("type") is float:
            kwargs["type"] = finite_option
        return super().add_argument(*names, **kwargs)

    def error(self, message: str):  # type: ignore[override]
        # argparse says "argument --paths: ..."; rmkit names the option first, like the library
        text = message[len("argument "):] if message.startswith("argument ") else message
        raise InputError(f"{text}; see '{self.prog} --help'")


def whole_option(low: int, high: int):
    """An argparse type: a whole number in ``[low, high]``."""
    def parse(text: str) -> int:
        try:
            value = int(text.strip())
        except ValueError:
            value = None
        if value is None or not low <= value <= high:
            raise argparse.ArgumentTypeError(f"expected {whole_rule(low, high)}, got {text!r}")
        return value

    parse.__name__ = "whole number"
    return parse


def finite_option(text: str) -> float:
    """An argparse type: a finite number."""
    try:
        value = float(text)
    except ValueError:
        value = math.nan
    if not math.isfinite(value):
        raise argparse.ArgumentTypeError(f"expected a finite number, got {text!r}")
    return value


def join_negative_values(argv: list[str]) -> list[str]:
    """``--capacity -1,2`` as ``--capacity=-1,2``, so the value reaches its own check."""
    out: list[str] = []
    i = 0
    while i < len(argv):
        if argv[i] in NEGATIVE_LOOKING and i + 1 < len(argv) and argv[i + 1].startswith("-") \
                and not argv[i + 1].startswith("--"):
            out.append(f"{argv[i]}={argv[i + 1]}")
            i += 2
            continue
        out.append(argv[i])
        i += 1
    return out


def check_outputs(args: argparse.Namespace, **suffixes: tuple[str, ...]) -> None:
    """Refuse, before any work, every output option given (``out=(".nc",)``, ...) that cannot
    be written (see :func:`rmkit.files.check_output`)."""
    from rmkit.files import check_output

    for name, allowed in suffixes.items():
        value = getattr(args, name, None)
        if value is not None:
            check_output(value, "--" + name.replace("_", "-"), allowed)


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
        given: set[str] = set()
        for part in parts:
            leg, _, raw = part.partition("=")
            leg = leg.strip()
            if leg not in network.leg_ids:
                raise InputError(f"--capacity: unknown leg id {leg!r}; legs are "
                                 f"{quoted(network.leg_ids)}")
            if leg in given:
                raise InputError(f"--capacity: leg {leg!r} is given twice; give each leg once")
            given.add(leg)
            x[network.leg_index(leg)] = _int(raw, "--capacity")
    else:
        x = [_int(p, "--capacity") for p in parts]
    return BookingState(period=period, capacity=tuple(network.check_capacity(x, "--capacity")))


def _int(raw: str, field: str) -> int:
    try:
        value = int(raw)
    except ValueError:
        raise InputError(f"{field}: seats left must be whole numbers, got {raw!r}") from None
    if not -MAX_COUNT <= value <= MAX_COUNT:  # beyond int64; the range check names the leg
        raise InputError(f"{field}: seats left must be whole numbers in [0, {MAX_COUNT}], got "
                         f"{raw!r}")
    return value


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
