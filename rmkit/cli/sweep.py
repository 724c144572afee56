"""``rmkit sweep``: run a grid of (scenario, method, seed) cells on a dask cluster, resumably."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from rmkit.cli._common import add_json, emit_json, fmt

#: Library fields this command fills from options (see rmkit.cli.option_message).
OPTIONS = {"store": "--out", "scheduler": "--scheduler", "workers": "--workers"}
HELP = "run a grid of scenarios x methods x seeds on a local or remote dask cluster (resumable)"

EPILOG = """\
grid layout (TOML):
  [sweep]      name = "...", seeds = [0, 1, 2] (or a count)
  [[scenario]] files = ["paths or globs"]  |  generator = "hub-spoke" | "line", settings = {...}
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
    add_json(parser)


def print_wide_table(title: str, columns: list[str], rows: list[list], note: str = "") -> None:
    """A rich table that keeps long labels whole (at least 160 columns when not on a terminal)."""
    import shutil

    from rich.console import Console
    from rich.table import Table

    table = Table(title=title, title_justify="left")
    for i, col in enumerate(columns):
        table.add_column(col, justify="left" if i == 0 else "right", no_wrap=True)
    for row in rows:
        table.add_row(*[fmt(v) for v in row])
    width = shutil.get_terminal_size((160, 24)).columns if sys.stdout.isatty() else 160
    console = Console(width=max(width, 80))
    console.print(table)
    if note:
        console.print(note, style="dim")


def default_store(grid: str) -> Path:
    p = Path(grid)
    return p.with_name(p.stem + ".sweep")


def run(args: argparse.Namespace) -> int:
    from rmkit.errors import InputError
    from rmkit.workflows.sweep import (
        SweepInterrupted,
        iter_failures,
        load_grid,
        open_sweep,
        run_sweep,
        summary_by_method,
        value_table,
    )

    if args.workers is not None and args.workers < 1:
        raise InputError(f"--workers: must be >= 1, got {args.workers}")
    grid = load_grid(args.grid)
    store = Path(args.out) if args.out else default_store(args.grid)
    try:
        report = run_sweep(grid, store, scheduler=args.scheduler, workers=args.workers,
                           retry_failed=args.retry_failed, dashboard=args.dashboard,
                           progress=not (args.no_progress or args.json))
    except SweepInterrupted as stop:
        print(f"rmkit: interrupted: {stop.stored} of {stop.report.total} cells are stored in "
              f"{stop.report.store}; run the same command to resume", file=sys.stderr)
        return 130
    ds = open_sweep(store)
    summary = summary_by_method(ds)
    failures = list(iter_failures(ds))
    if args.json:
        emit_json({
            "store": str(store), "combined": str(store / "sweep.nc"), "cells": report.total,
            "resumed": report.resumed, "computed": report.computed,
            "failed": len(failures), "seconds": report.seconds,
            "methods": {
                str(m): {k: summary[k].sel({"method": m}).item() for k in summary.data_vars}
                for m in summary.method.values
            },
            "failures": [dict(zip(("scenario", "method", "seed", "error"), f, strict=True))
                         for f in failures],
        })
        return 1 if failures else 0
    print_wide_table(
        f"{grid.name}: {report.total} cells ({report.resumed} already stored, "
        f"{report.computed} computed now) in {report.seconds:.1f} s",
        ["method", "measure", "kind", "done", "failed", "mean value", "mean std. error",
         "mean seconds"],
        [[str(m), str(summary.measure.values[i]), str(summary.kind.values[i]),
          int(summary["done"].values[i]),
          int(summary["failed"].values[i]), float(summary["mean_value"].values[i]),
          float(summary["mean_stderr"].values[i]), float(summary["mean_seconds"].values[i])]
         for i, m in enumerate(summary.method.values)],
        note=f"store: {store}  (open with rmkit.open_sweep; combined file sweep.nc)",
    )
    values = value_table(ds)
    if values.sizes["scenario"] <= 60:
        methods = [str(m) for m in values.method.values]
        print_wide_table("mean value over seeds", ["scenario", *methods],
                    [[str(s), *[float(v) for v in values.sel(scenario=s).values]]
                     for s in values.scenario.values])
    for scen, meth, seed, err in failures[:10]:
        print(f"failed: {scen} / {meth} / seed {seed}: {err}", file=sys.stderr)
    if len(failures) > 10:
        print(f"... and {len(failures) - 10} more failed cells (see the store)", file=sys.stderr)
    return 1 if failures else 0
