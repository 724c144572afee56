"""``rmkit sweep``: run a grid of (scenario, method, seed) cells on a dask cluster, resumably."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from rmkit.cli._common import add_json, emit_json
from rmkit.cli._options import add_csv
from rmkit.cli._report import Table, check_table_target, print_tables, write_tables

#: Library fields this command fills from options (see rmkit.cli.option_message).
OPTIONS = {"store": "--out", "scheduler": "--scheduler", "workers": "--workers", "grid": "GRID"}
#: Scenarios of the value matrix printed (--csv writes them all).
MAX_PRINTED = 60
HELP = "run a grid of scenarios x methods x seeds on a local or remote dask cluster (resumable)"

EPILOG = """\
grid layout (TOML):
  [sweep]      name = "...", seeds = [0, 1, 2] (or a count)
  [[scenario]] files = ["paths or globs"]  |  generator = "hub-spoke" | "line" |
               "hub-spoke-choice", settings = {...}
  [[method]]   method = "dlp", params = {...}, label = "..."
  [[policy]]   method = "dlp", paths = 500, resolves = [0, 5], params = {...}
Each finished cell is written to the store at once; rerun the same command to resume.
"""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.formatter_class = argparse.RawDescriptionHelpFormatter
    parser.epilog = EPILOG
    parser.add_argument("grid", help="sweep grid .toml")
    parser.add_argument("--scheduler", default=None, metavar="ADDRESS",
                        help="address of a running dask scheduler, e.g. tcp://10.0.0.5:8786 "
                        "(default: start a local cluster)")
    parser.add_argument("--workers", type=int, default=None,
                        help="worker processes of the local cluster (default: one per CPU)")
    parser.add_argument("--out", default=None, metavar="STORE",
                        help="result folder (default: GRID without .toml, plus .sweep)")
    parser.add_argument("--retry-failed", action="store_true",
                        help="recompute cells stored with an error")
    parser.add_argument("--no-progress", action="store_true", help="no progress bar")
    parser.add_argument("--dashboard", action="store_true",
                        help="serve the local cluster's dask dashboard on 127.0.0.1 (an "
                        "unauthenticated page; off by default)")
    parser.add_argument("--plot", default=None,
                        help="draw the method x scenario panel to FILE.png")
    parser.add_argument("--gap-table", default=None, metavar="PREFIX",
                        help="write the certified-gap table (per scenario: the tightest bound, "
                        "the best policy, the gap with its 95%% interval; then the median and "
                        "the maximum) to PREFIX.nc, PREFIX.csv and PREFIX.png")
    add_csv(parser)
    add_json(parser)


def default_store(grid: str) -> Path:
    p = Path(grid)
    return p.with_name(p.stem + ".sweep")


def refuse_scenario_file(path: str) -> None:
    """A scenario file given where a grid belongs gets its own message, not a schema error."""
    import tomllib

    from rmkit.errors import InputError

    try:
        data = tomllib.loads(Path(path).read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, tomllib.TOMLDecodeError):
        return  # load_grid says what is wrong
    if not {"leg", "product", "demand", "csv"} & set(data) or "sweep" in data:
        return
    raise InputError(f"grid: {path} is a scenario file, not a sweep grid; run 'rmkit compare "
                     f"{path}' on it, or name it in a grid under [[scenario]] files = [...] "
                     "(layout: rmkit sweep --help; example: examples/sweep_grid.toml)")


def _kind(ds, q: int) -> str:
    """The kind of method ``q``, labelled when it runs through the independent-demand view."""
    from rmkit.methods.base import assumption_label

    kind = str(ds["kind"].values[q])
    label = assumption_label(str(ds["assumes_independent_demand"].values[q])
                             if "assumes_independent_demand" in ds.coords else "")
    return f"{kind}; {label}" if label else kind


def tables(ds, grid_name: str, report) -> list[Table]:
    """Cells by method, the method x scenario values, and the identical policies."""
    from rmkit.workflows.sweep import summary_by_method, value_table
    from rmkit.workflows.sweep.identical import identical_policies

    summary = summary_by_method(ds)
    methods = [str(m) for m in summary.method.values]
    cells = Table(
        "cells", f"{grid_name}: {report.total} cells ({report.resumed} already stored, "
        f"{report.computed} computed now) in {report.seconds:.1f} s",
        ["method", "measure", "kind", "paths", "re-solves", "done", "failed",
         "mean seconds per cell"],
        [[m, str(summary.measure.values[q]), _kind(ds, q),
          int(ds["paths"].values[q]) if str(summary.measure.values[q]) == "policy" else None,
          int(ds["resolve"].values[q]) if str(summary.measure.values[q]) == "policy" else None,
          int(summary["done"].values[q]), int(summary["failed"].values[q]),
          float(summary["mean_seconds"].values[q])] for q, m in enumerate(methods)],
        [None, None, None, ",d", "d", "d", "d", ".2f"])
    values = value_table(ds)
    matrix = Table(
        "values", "value by scenario and method, mean over seeds (an optimum, an upper bound, or "
        "a policy's mean simulated revenue: see the measure and kind above)",
        ["scenario", *methods],
        [[str(sc), *[float(v) for v in values.sel(scenario=sc).values]]
         for sc in values.scenario.values],
        [None, *[",.1f"] * len(methods)])
    same = list(identical_policies(ds))
    twins = Table("identical_policies", "policies with identical revenue on every path",
                  ["scenario", "policy", "same as"], [list(t) for t in same])
    return [cells, matrix, twins] if same else [cells, matrix]


GAP_KEYS = ("instance", "best_bound", "bound", "bound_stderr", "best_policy", "revenue_mean",
            "revenue_stderr", "gap_percent", "gap_percent_ci_low", "gap_percent_ci_high",
            "gap_percent_stderr", "pairing")
GAP_NOTE = ("gap %: 100 (best bound - best policy's mean revenue) / best bound, 95% interval; a "
            "sampled bound's standard error is combined with the policy's in quadrature (its "
            "streams differ from the policies' in a sweep); the true gap to the optimum is "
            "smaller")


def check_gap_prefix(prefix: str) -> None:
    """The three gap-table files must be writable before any cell runs."""
    from rmkit.files import check_output

    base = Path(prefix)
    if base.suffix in (".nc", ".csv", ".png"):
        base = base.with_suffix("")
    for suffix in (".nc", ".csv", ".png"):
        check_output(base.with_name(base.name + suffix), "--gap-table", (suffix,))


def gap_print_table(gaps) -> Table:
    """The gap table as printed (and as the JSON rows)."""
    from rmkit.workflows.sweep.gaps import CSV_COLUMNS, gap_rows

    return Table("gaps", "certified gap: the best policy against the tightest bound (95% "
                 "interval)", list(CSV_COLUMNS), gap_rows(gaps),
                 [None, None, ",.1f", ".1f", None, ",.1f", ".1f", ".2f", ".2f", ".2f", ".2f",
                  None])


def run(args: argparse.Namespace) -> int:
    from rmkit.errors import InputError
    from rmkit.files import check_output
    from rmkit.workflows.sweep import (
        SweepInterrupted,
        iter_failures,
        load_grid,
        open_sweep,
        run_sweep,
    )

    if args.workers is not None and args.workers < 1:
        raise InputError(f"--workers: must be >= 1, got {args.workers}")
    check_table_target(args.csv)
    if args.plot is not None:
        check_output(args.plot, "--plot", (".png",))
    if args.gap_table is not None:
        check_gap_prefix(args.gap_table)
    refuse_scenario_file(args.grid)
    grid = load_grid(args.grid)
    store = Path(args.out) if args.out else default_store(args.grid)
    try:
        report = run_sweep(grid, store, scheduler=args.scheduler, workers=args.workers,
                           retry_failed=args.retry_failed, dashboard=args.dashboard,
                           progress=not (args.no_progress or args.json) and sys.stderr.isatty())
    except SweepInterrupted as stop:
        print(f"rmkit: interrupted: {stop.stored} of {stop.report.total} cells are stored in "
              f"{stop.report.store}; run the same command to resume", file=sys.stderr)
        return 130
    ds = open_sweep(store, paths=True)
    failures = list(iter_failures(ds))
    found = tables(ds, grid.name, report)
    written = [str(p) for p in write_tables(found, args.csv)]
    if args.plot:
        from rmkit.files import write_atomically
        from rmkit.workflows.figures import sweep_figure

        write_atomically(args.plot, lambda tmp: sweep_figure(ds, tmp), "--plot")
    gaps = None
    if args.gap_table:
        from rmkit.workflows.sweep import gap_table, write_gap_table

        gaps = gap_table(ds)
        gap_files = write_gap_table(gaps, args.gap_table)
    if args.json:
        emit_json({
            "store": str(store), "combined": str(store / "sweep.nc"), "cells": report.total,
            "resumed": report.resumed, "computed": report.computed,
            "failed": len(failures), "seconds": report.seconds,
            "methods": {str(r[0]): dict(zip(found[0].columns[1:], r[1:], strict=True))
                        for r in found[0].rows},
            "values": {str(r[0]): dict(zip(found[1].columns[1:], r[1:], strict=True))
                       for r in found[1].rows},
            "identical_policies": [dict(zip(("scenario", "policy", "same_as"), r, strict=True))
                                   for r in (found[2].rows if len(found) > 2 else [])],
            "failures": [dict(zip(("scenario", "method", "seed", "error"), f, strict=True))
                         for f in failures],
            "csv": written, "plot": args.plot,
            "gap_table": None if gaps is None else {
                "files": {k: str(v) for k, v in gap_files.items()},
                "median": gaps.attrs["gap_median"], "maximum": gaps.attrs["gap_max"],
                "maximum_at": gaps.attrs["gap_max_scenario"],
                "rows": [dict(zip(GAP_KEYS, r, strict=True)) for r in gap_print_table(gaps).rows],
            },
        })
        return 1 if failures else 0
    matrix = found[1]
    if len(matrix.rows) > MAX_PRINTED:
        matrix.shown = [[matrix.cell(k, v) for k, v in enumerate(r)]
                        for r in matrix.rows[:MAX_PRINTED]]
        matrix.note = f"first {MAX_PRINTED} of {len(matrix.rows)} scenarios; --csv has them all"
    if len(found) > 2:
        from rmkit.workflows.sweep.identical import WHY

        found[2].note = WHY
    notes = [f"store: {store}  (open with rmkit.open_sweep; combined file sweep.nc)"]
    notes += [f"{label} written to {target}" for label, target in
              (("figure", args.plot), ("tables", ", ".join(written))) if target]
    if gaps is not None:
        notes.append(GAP_NOTE)
        notes.append("gap table written to " + ", ".join(str(p) for p in gap_files.values()))
    print_tables(found + ([gap_print_table(gaps)] if gaps is not None else []), notes)
    for scen, meth, seed, err in failures[:10]:
        print(f"failed: {scen} / {meth} / seed {seed}: {err}", file=sys.stderr)
    if len(failures) > 10:
        print(f"... and {len(failures) - 10} more failed cells (see the store)", file=sys.stderr)
    return 1 if failures else 0
