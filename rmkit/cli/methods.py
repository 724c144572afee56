"""``rmkit methods``: every method and policy, what it is, what it accepts, its settings, its paper."""

from __future__ import annotations

import argparse
from typing import Any

from rmkit.cli._common import add_json, emit_json
from rmkit.cli._report import Table

HELP = "list every method and policy: kind, control, demand kinds, settings and citation"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("name", nargs="?", default=None,
                        help="one method or policy to describe (default: all)")
    add_json(parser)


def _jsonable(v: Any) -> Any:
    return v if isinstance(v, (str, int, float, bool, type(None))) else str(v)


def listing() -> list[dict[str, Any]]:
    """One entry per registered method, then each control that runs without a method (fcfs)."""
    from rmkit.controls import get_control, load_controls
    from rmkit.methods.base import kind_of, load_all

    out = []
    for name, cls in sorted(load_all().items()):
        tags = cls.tags
        control = get_control(tags.control).description if tags.control else ""
        out.append({
            "name": name, "type": "method", "kind": kind_of(cls),
            "control": tags.control or None, "control_description": control,
            "stochastic": tags.stochastic, "gives_bid_prices": tags.gives_bid_prices,
            "capacity_dependent": tags.capacity_dependent,
            "small_state_space_only": tags.small_state_space,
            "demand_kinds": list(cls.demand_kinds),
            "summary": (cls.__doc__ or "").strip().splitlines()[0],
            "settings": {p: {"default": _jsonable(spec.default), "rule": spec.rule,
                             "search": spec.search.kind if spec.search else None}
                         for p, spec in cls.params.items()},
            "citation": cls.citation,
        })
    for name, control in sorted(load_controls().items()):
        if control.needs_result:
            continue
        out.append({
            "name": name, "type": "policy", "kind": "baseline", "control": name,
            "control_description": control.description, "stochastic": False,
            "gives_bid_prices": False, "capacity_dependent": False,
            "small_state_space_only": False, "demand_kinds": ["any"],
            "summary": control.description, "settings": {}, "citation": "",
        })
    return out


def tables(entries: list[dict[str, Any]]) -> list[Table]:
    methods = Table("methods", "methods and policies (simulate --policy takes any with a control)",
                    ["name", "kind", "control", "demand kinds", "what it is"],
                    [[e["name"], e["kind"], e["control"] or "none (a bound)",
                      ", ".join(e["demand_kinds"]), e["summary"]] for e in entries])
    settings = Table("settings", "settings (--param METHOD.NAME=VALUE; 'search': calibrate "
                     "--search can tune it)", ["method", "setting", "default", "rule", "search"],
                     [[e["name"], p, str(s["default"]), s["rule"], s["search"] or "-"]
                      for e in entries for p, s in e["settings"].items()])
    return [methods, settings]


def run(args: argparse.Namespace) -> int:
    from rmkit.cli._report import print_tables
    from rmkit.errors import InputError

    entries = listing()
    if args.name is not None:
        picked = [e for e in entries if e["name"] == args.name]
        if not picked:
            raise InputError(f"name: unknown method or policy {args.name!r}; valid: "
                             f"{', '.join(e['name'] for e in entries)}")
        entries = picked
    if args.json:
        emit_json({"methods": entries})
        return 0
    found = tables(entries)
    cites = [f"{e['name']}: {e['citation']}" for e in entries if e["citation"]]
    print_tables(found, ["citations:", *cites] if cites else [])
    return 0
