"""``rmkit calibrate``: tune a heuristic's settings for simulated revenue, re-checked on fresh paths."""

from __future__ import annotations

import argparse
from typing import Any

from rmkit.cli._common import add_json, add_scenario, emit_json, load
from rmkit.cli._options import add_csv, add_param, add_quiet, add_run_defaults
from rmkit.cli._report import CAUTION, Table

#: Library fields this command fills from options (see rmkit.cli.option_message).
OPTIONS = {"ranges": "--search", "heuristic": "--heuristic", "paths": "--paths",
           "settings": "--param"}
HELP = "tune a heuristic's settings (multiplier, fare basis, buckets, re-solves) for revenue"
#: Rows of the search trail printed (the CSV and JSON have every setting tried).
TOP = 10


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_scenario(parser)
    parser.add_argument("--heuristic", required=True,
                        help="method to tune, e.g. emsrb-heuristic, davn, emsrb, dlp")
    parser.add_argument(
        "--search", action="append", default=[], metavar="NAME=LO:HI",
        help="a setting to search (repeatable): multiplier=0.5:1.5, displacement_iterations=0:3, "
        "buckets=2:10, resolve=0:10, fare_basis=full,prorated,network, law=poisson,normal")
    add_param(parser, one_method=True)
    add_run_defaults(parser, paths_help="simulated paths of the search")
    parser.add_argument("--fresh-seed", type=int, default=None,
                        help="seed of the fresh paths the result is re-measured on (default "
                        "seed + 1)")
    parser.add_argument("--plot", default=None,
                        help="draw the revenue over the searched settings to FILE.png")
    add_csv(parser)
    add_quiet(parser)
    add_json(parser)


def parse_ranges(items: list[str]) -> dict[str, str]:
    from rmkit.errors import InputError

    out: dict[str, str] = {}
    for item in items:
        name, sep, text = item.partition("=")
        if not sep or not name.strip() or not text.strip():
            raise InputError(f"--search: expected NAME=LO:HI (or NAME=a,b for choices), got "
                             f"{item!r}")
        out[name.strip()] = text.strip()
    return out


def _fixed(items: list[str], heuristic: str) -> dict[str, Any]:
    from rmkit.cli._options import one_method_settings
    from rmkit.errors import InputError

    fixed = one_method_settings(items, heuristic)
    ranged = [k for k, v in fixed.items() if isinstance(v, str) and ":" in v]
    if ranged:
        raise InputError(f"--param: {ranged[0]}={fixed[ranged[0]]} looks like a range; search "
                         f"it with --search {ranged[0]}={fixed[ranged[0]]} (--param fixes a "
                         "setting)")
    return fixed


def run(args: argparse.Namespace) -> int:
    from rmkit.cli._progress import progress_bar
    from rmkit.cli._report import (
        check_table_target,
        print_tables,
        provenance_json,
        warnings_summarised,
        write_tables,
    )
    from rmkit.files import check_output
    from rmkit.workflows.calibrate import calibrate, calibration_report
    from rmkit.workflows.defaults import run_settings

    scenario = load(args.scenario)
    if args.plot is not None:
        check_output(args.plot, "--plot", (".png",))
    check_table_target(args.csv)
    run_ = run_settings(scenario, paths=args.paths, resolve=args.resolve, seed=args.seed)
    with warnings_summarised("calibrate"), progress_bar("calibrate", args) as progress:
        ds = calibrate(scenario.network, scenario.demand, args.heuristic,
                       parse_ranges(args.search), paths=run_.paths, seed=run_.seed,
                       fresh_seed=args.fresh_seed, resolve=run_.resolve,
                       settings=_fixed(args.param, args.heuristic), progress=progress)
    out = {"scenario": scenario.name, **calibration_report(ds), "resolve": run_.resolve,
           "defaults_from": run_.header()}
    if args.plot:
        from rmkit.files import write_atomically
        from rmkit.workflows.figures import calibration_figure

        write_atomically(args.plot, lambda tmp: calibration_figure(ds, tmp), "--plot")
    found = tables(out, scenario.name, run_.header())
    written = [str(p) for p in write_tables(found, args.csv)]
    if args.json:
        emit_json({**out, "plot": args.plot, "csv": written,
                   "provenance": provenance_json(scenario)})
        return 0
    trail = found[1]
    trail.shown = [[trail.cell(k, v) for k, v in enumerate(r)] for r in trail.rows[:TOP]]
    print_tables(found, notes(out, written))
    return 0


def _setting(setting: dict[str, Any], searched: dict[str, Any]) -> str:
    return ", ".join(
        f"{k}={v:.4g}" if isinstance(v, float) else f"{k}={v}"
        for k, v in setting.items() if k in searched
    ) or "default"


def tables(out: dict[str, Any], name: str, header: str) -> list[Table]:
    """The verdict (default and tuned, on the search and on fresh paths) and the search trail."""
    searched = out["searched"]
    verdict = Table(
        "calibration", f"{name}: calibrating {out['heuristic']}, {header}; {out['evaluations']} "
        "settings tried",
        ["", "setting", "revenue (search paths)", f"revenue (fresh paths, seed {out['fresh_seed']})",
         "fresh std. error", "gap % (fresh, estimate)"],
        [[label, _setting(out[label]["setting"], searched), out[label]["revenue"],
          out[label]["fresh_revenue"], out[label]["fresh_stderr"],
          out[label]["fresh_gap_percent"]] for label in ("default", "tuned")],
        [None, None, ",.1f", ",.1f", ",.1f", ".2f"])
    ranked = sorted(out["trail"], key=lambda e: -e["revenue"])
    trail = Table(
        "trail", f"the search: settings by revenue on the search paths (top {min(TOP, len(ranked))}"
        f" of {len(ranked)} shown; --csv or --json for all)",
        ["rank", "setting", "revenue (search paths)", "std. error"],
        [[k, _setting(e["setting"], searched), e["revenue"], e["stderr"]]
         for k, e in enumerate(ranked, start=1)],
        ["d", None, ",.1f", ",.1f"])
    return [verdict, trail]


def notes(out: dict[str, Any], written: list[str]) -> list[str]:
    imp, ref = out["improvement_fresh"], out["reference"]
    lines = [f"tuned - default on the fresh paths: {imp['mean']:,.2f} (95% CI "
             f"{imp['ci_low']:,.2f} .. {imp['ci_high']:,.2f}, paired)"]
    if ref["kind"] == "optimum":
        lines.append(f"gap % against the optimum: the exact DP value {ref['value']:,.2f} "
                     f"({ref['method']}), not a simulated revenue")
    elif ref["kind"] != "none":
        lines.append(f"gap % against the best upper bound ({ref['method']}, "
                     f"{ref['value']:,.2f}); the true gap to the optimum is smaller")
    lines.append("Only the fresh-path figures estimate what tuning buys; the search paths "
                 "favour the winner.")
    if written:
        lines.append(f"tables written to {', '.join(written)}")
    lines.append(CAUTION)
    return lines
