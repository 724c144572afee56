"""``rmkit compare``: every method on one scenario, value by value against the optimum."""

from __future__ import annotations

import argparse
import sys
from typing import Any

from rmkit.cli._common import CAUTION, add_json, add_scenario, emit_json, load
from rmkit.cli._common import check_outputs as check_paths_first

HELP = "run methods on a scenario: bounds, bid prices, simulated revenue, errors vs the optimum"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_scenario(parser)
    add_compare_options(parser)
    add_outputs(parser)
    add_json(parser)


def add_compare_options(parser: argparse.ArgumentParser, *, paths: int | None = None,
                        resolve: int | None = None) -> None:
    """Options shared with ``rmkit demo``."""
    parser.add_argument("--methods", default=None,
                        help="comma-separated method names (default: every method that fits)")
    parser.add_argument("--paths", type=int, default=paths,
                        help="simulated request streams per policy (default: the scenario's, "
                        "else 500)" if paths is None else f"simulated paths (default {paths})")
    parser.add_argument("--resolve", type=int, default=resolve,
                        help="re-solves of each policy at equally spaced periods (default 0; "
                        "re-solving every method is the slow part)" if resolve is None else
                        f"re-solves per policy (default {resolve})")
    parser.add_argument("--seed", type=int, default=None, help="random seed (default: scenario's)")
    parser.add_argument("--visit-paths", type=int, default=None,
                        help="paths that estimate where the optimal policy goes (default 200)")
    parser.add_argument("--param", action="append", default=[], metavar="METHOD.NAME=VALUE",
                        help="a method setting (repeatable), e.g. lr.max_iterations=500; VALUE "
                        "is read as JSON when it parses")


def parse_method_params(items: list[str]) -> dict[str, dict[str, Any]]:
    """``METHOD.NAME=VALUE`` items as method -> settings."""
    from rmkit.cli._common import parse_params
    from rmkit.errors import InputError

    out: dict[str, dict[str, Any]] = {}
    for item in items:
        key, sep, raw = item.partition("=")
        method, dot, name = key.partition(".")
        if not (sep and dot and method and name):
            raise InputError(f"--param: expected METHOD.NAME=VALUE, got {item!r}")
        out.setdefault(method, {}).update(parse_params([f"{name}={raw}"]))
    return out


def add_outputs(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--out", default=None, help="write the comparison to FILE.nc (NetCDF)")
    parser.add_argument("--plot", default=None, help="draw the figure to FILE.png")


def run_comparison(scenario: Any, args: argparse.Namespace, quiet: bool):
    """Run :func:`rmkit.workflows.compare.compare` with the command's options; return the Dataset."""
    from rmkit.workflows.compare import DEFAULT_PATHS, DEFAULT_VISIT_PATHS, compare

    defaults = scenario.spec.defaults
    paths = args.paths if args.paths is not None else (defaults.paths or DEFAULT_PATHS)
    resolve = args.resolve if args.resolve is not None else 0
    seed = args.seed if args.seed is not None else scenario.default_seed
    visit_paths = args.visit_paths if args.visit_paths is not None else DEFAULT_VISIT_PATHS

    def progress(message: str) -> None:
        print(f"rmkit compare: {message}", file=sys.stderr, flush=True)

    return compare(scenario.network, scenario.demand, methods=args.methods, paths=paths,
                   resolve=resolve, seed=seed, visit_paths=visit_paths, scenario=scenario.name,
                   settings=parse_method_params(args.param),
                   progress=None if quiet else progress)


def check_outputs(out: str | None, plot: str | None) -> None:
    from rmkit.errors import InputError

    if out is not None and not str(out).lower().endswith(".nc"):
        raise InputError(f"--out: {out!r} should end in .nc")
    if plot is not None and not str(plot).lower().endswith(".png"):
        raise InputError(f"--plot: {plot!r} should end in .png")


def write_outputs(ds, out: str | None, plot: str | None) -> None:
    from rmkit.cli._common import write_netcdf
    from rmkit.files import write_atomically

    if out:
        write_netcdf(ds, out)
    if plot:
        from rmkit.workflows.plots import comparison_figure

        write_atomically(plot, lambda tmp: comparison_figure(ds, tmp), "--plot")


def report(ds, out: str | None, plot: str | None) -> dict[str, Any]:
    """The JSON object of a comparison."""
    from rmkit.workflows.compare import ranked

    attrs = ds.attrs
    return {
        "scenario": attrs["scenario"],
        "seed": attrs["seed"],
        "paths": attrs["paths"],
        "resolve": attrs["resolve"],
        "reference": {"kind": attrs["reference_kind"], "method": attrs["reference_method"],
                      "value": attrs["reference_value"]},
        "best_policy": attrs["best_policy"],
        "errors": attrs["errors"],
        "methods": ranked(ds),
        "out": out,
        "plot": plot,
    }


def _num(v: float | None, spec: str) -> str:
    return "-" if v is None else format(v, spec)


def table_rows(ds) -> tuple[list[list[str]], list[str]]:
    """Rows of the ranked table (strings) and the notes on skipped or failed methods."""
    from rmkit.workflows.compare import ranked

    rows, notes = [], []
    for r in ranked(ds):
        kind = {"upper bound": "bound"}.get(r["kind"], r["kind"])
        if r["status"] != "ran":
            rows.append(["-", r["method"], r["status"], *["-"] * 6])
            notes.append(f"{r['method']} {r['status']}: {r['reason']}")
            continue
        half = (None if r["revenue_ci_high"] is None
                else (r["revenue_ci_high"] - r["revenue_ci_low"]) / 2)
        err = ("-" if r["bid_price_error_mean"] is None else
               f"{r['bid_price_error_mean']:.2f} / {r['bid_price_error_max']:.1f}")
        bound = "-" if r["kind"] == "heuristic" else _num(r["value"], ",.1f")
        if r["kind"] != "heuristic" and r["value_stderr"] is not None:
            bound += f" ± {r['value_stderr']:.1f}"
        seconds = sum(v for v in (r["solve_seconds"], r["simulate_seconds"]) if v is not None)
        rows.append([_num(r["rank"], "d"), r["method"], kind, _num(r["revenue_mean"], ",.1f"),
                     "-" if half is None else f"± {half:,.1f}", _num(r["gap_percent"], ".2f"),
                     err, bound, f"{seconds:.2f}"])
    return rows, notes


def print_report(ds, out: str | None, plot: str | None) -> None:
    from rich.table import Table

    from rmkit.workflows.compare import ranked

    attrs = ds.attrs
    ref = attrs["reference_kind"]
    rows, notes = table_rows(ds)
    columns = ["rank", "method", "kind", "revenue", "95% CI",
               "gap to optimum %" if ref == "optimum" else "gap to best bound %",
               "bid-price error mean / max", "bound or optimum", "seconds"]
    table = Table(title=f"{attrs['scenario']}: {attrs['paths']} paths, {attrs['resolve']} "
                  f"re-solves, seed {attrs['seed']}", title_justify="left")
    for k, col in enumerate(columns):
        table.add_column(col, justify="left" if k in (1, 2) else "right")
    for row in rows:
        table.add_row(*row)
    if ref != "none":
        notes.append(f"gaps against the {ref} ({attrs['reference_method']}, "
                     f"{attrs['reference_value']:,.2f})")
    if attrs["errors"]:
        notes.append(f"bid-price error (currency per seat): {attrs['errors']}")
    for r in ranked(ds):
        if r["check"] not in ("", "ok"):
            notes.append(f"CHECK FAILED for {r['method']}: {r['check']}")
        if r["warning"]:
            notes.append(f"{r['method']}: {r['warning']}")
    for label, target in (("NetCDF", out), ("figure", plot)):
        if target:
            notes.append(f"{label} written to {target}")
    notes.append(CAUTION)
    print_wide(table, notes)


def print_wide(table, notes: list[str]) -> None:
    """Print a rich table and notes; to pipes and files wide enough that no cell wraps."""
    from rich.console import Console

    console = Console()
    if not console.is_terminal:
        console = Console(width=160)
    console.print(table)
    console.print("\n".join(notes), style="dim")


def run(args: argparse.Namespace) -> int:
    check_paths_first(args, out=(".nc",), plot=(".png",))
    scenario = load(args.scenario)
    check_outputs(args.out, args.plot)
    ds = run_comparison(scenario, args, quiet=args.json)
    write_outputs(ds, args.out, args.plot)
    if args.json:
        emit_json(report(ds, args.out, args.plot))
    else:
        print_report(ds, args.out, args.plot)
    return 0

