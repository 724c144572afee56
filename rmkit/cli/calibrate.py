"""``rmkit calibrate``: tune a heuristic's settings for simulated revenue, re-checked on fresh paths."""

from __future__ import annotations

import argparse
from typing import Any

from rmkit.cli._common import CAUTION, add_json, add_scenario, emit_json, load

#: Library fields this command fills from options (see rmkit.cli.option_message).
OPTIONS = {"ranges": "--param", "heuristic": "--heuristic", "paths": "--paths"}
HELP = "tune a heuristic's settings (multiplier, fare basis, buckets, re-solves) for revenue"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_scenario(parser)
    parser.add_argument("--heuristic", required=True,
                        help="method to tune, e.g. emsrb-heuristic, davn, emsrb, dlp")
    parser.add_argument(
        "--param", action="append", default=[], metavar="NAME=LO:HI",
        help="a setting to search (repeatable): multiplier=0.5:1.5, displacement_iterations=0:3, "
        "buckets=2:10, resolve=0:10, fare_basis=full,prorated,network, law=poisson,normal")
    parser.add_argument("--paths", type=int, default=None,
                        help="simulated paths of the search (default: the scenario's, else 500)")
    parser.add_argument("--seed", type=int, default=None, help="seed of the search's paths")
    parser.add_argument("--fresh-seed", type=int, default=None,
                        help="seed of the fresh paths the result is re-measured on (seed + 1)")
    parser.add_argument("--resolve", type=int, default=None,
                        help="re-solves when 'resolve' is not searched (default 0: every "
                        "re-solve multiplies the search time)")
    add_json(parser)


def parse_ranges(items: list[str]) -> dict[str, str]:
    from rmkit.errors import InputError

    out: dict[str, str] = {}
    for item in items:
        name, sep, text = item.partition("=")
        if not sep or not name.strip() or not text.strip():
            raise InputError(f"--param: expected NAME=LO:HI (or NAME=a,b for choices), got "
                             f"{item!r}")
        out[name.strip()] = text.strip()
    return out


def _fmt_setting(setting: dict[str, Any], searched: dict[str, Any]) -> str:
    return ", ".join(
        f"{k}={v:.4g}" if isinstance(v, float) else f"{k}={v}"
        for k, v in setting.items() if k in searched
    )


def run(args: argparse.Namespace) -> int:
    from rmkit.workflows.calibrate import calibrate, calibration_report

    scenario = load(args.scenario)
    defaults = scenario.spec.defaults
    paths = args.paths if args.paths is not None else (defaults.paths or 500)
    seed = args.seed if args.seed is not None else scenario.default_seed
    resolve = args.resolve if args.resolve is not None else 0
    result = calibrate(scenario.network, scenario.demand, args.heuristic,
                       parse_ranges(args.param), paths=paths, seed=seed,
                       fresh_seed=args.fresh_seed, resolve=resolve)
    out = {"scenario": scenario.name, **calibration_report(result)}
    if args.json:
        emit_json(out)
        return 0
    print_report(out, scenario.name, paths, seed)
    return 0


def print_report(out: dict[str, Any], name: str, paths: int, seed: int) -> None:
    from rich.table import Table

    from rmkit.cli.compare import print_wide

    ref, searched = out["reference"], out["searched"]
    table = Table(title=f"{name}: calibrating {out['heuristic']} on {paths} paths (seed {seed}), "
                  f"{out['evaluations']} settings tried", title_justify="left")
    for k, col in enumerate(["", "setting", "revenue (search paths)",
                             f"revenue (fresh paths, seed {out['fresh_seed']})", "std. error",
                             "gap %"]):
        table.add_column(col, justify="left" if k < 2 else "right")
    for label in ("default", "tuned"):
        row = out[label]
        table.add_row(label, _fmt_setting(row["setting"], searched), f"{row['revenue']:,.1f}",
                      f"{row['fresh_revenue']:,.1f}", f"{row['fresh_stderr']:,.1f}",
                      "-" if row["fresh_gap_percent"] is None
                      else f"{row['fresh_gap_percent']:.2f}")
    if ref["kind"] != "none":
        table.add_row(ref["kind"], ref["method"], f"{ref['value']:,.1f}", "-", "-", "-")
    imp = out["improvement_fresh"]
    print_wide(table, [
        f"tuned - default on the fresh paths: {imp['mean']:,.2f} (95% CI {imp['ci_low']:,.2f} .. "
        f"{imp['ci_high']:,.2f}, paired)",
        "Only the fresh-path figures estimate what tuning buys; the search paths favour the "
        "winner.",
        CAUTION,
    ])
