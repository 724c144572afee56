"""``rmkit demo``: the main job end to end on the bundled example scenario.

Runs ``rmkit compare`` on the invented Tallowmere hub (4 legs, 12 products, 300 periods, small
enough for the exact DP) with the example's own ``[defaults]`` (paths, re-solves, seed), writes
the comparison as NetCDF, the figure as PNG and every table as CSV into a folder, and prints the
ranked table and where the files went.
"""

from __future__ import annotations

import argparse
import tomllib
from importlib import resources
from pathlib import Path

from rmkit.cli._common import add_json, emit_json
from rmkit.cli.compare import (
    OPTIONS,  # noqa: F401  (the same library fields as compare)
    add_compare_options,
    comparison_tables,
    print_report,
    report,
    run_comparison,
)

HELP = "compare every method on the bundled example; write the tables, NetCDF and figure"

DATA_FILE = "comparison.nc"
PLOT_FILE = "comparison.png"


def example_path() -> Path:
    """Path of the bundled example scenario (installed with the package)."""
    return Path(str(resources.files("rmkit") / "examples" / "tallowmere.toml"))


def example_defaults() -> dict[str, int]:
    """The example's ``[defaults]`` (read without validation: only for --help)."""
    try:
        return dict(tomllib.loads(example_path().read_text(encoding="utf-8")).get("defaults", {}))
    except (OSError, tomllib.TOMLDecodeError):
        return {}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_compare_options(parser)
    given = example_defaults()
    for action in parser._actions:  # state the values in force for the bundled example
        if action.dest in ("paths", "resolve", "seed") and action.dest in given:
            action.help = (action.help or "").split(" (default")[0] + (
                f" (default {given[action.dest]}: the example's [defaults])")
    parser.add_argument("--out-dir", default="rmkit-demo",
                        help="folder for comparison.nc, comparison.png and the tables as CSV "
                        "(default ./rmkit-demo)")
    add_json(parser)


def run(args: argparse.Namespace) -> int:
    from rmkit.cli._common import write_netcdf
    from rmkit.cli._report import check_table_target, stamp, warnings_summarised, write_tables
    from rmkit.errors import InputError
    from rmkit.files import check_output_folder, write_atomically
    from rmkit.model.scenario import load_scenario
    from rmkit.workflows.plots import comparison_figure

    folder = Path(args.out_dir)
    if folder.exists() and not folder.is_dir():
        raise InputError(f"--out-dir: {folder} exists and is not a folder; pick another path")
    check_output_folder(folder, "--out-dir")
    check_table_target(args.csv)
    scenario = load_scenario(example_path())
    with warnings_summarised("demo"):
        ds, _ = run_comparison(scenario, args, command="demo")
    folder.mkdir(parents=True, exist_ok=True)
    data, plot = folder / DATA_FILE, folder / PLOT_FILE
    stamp(ds, scenario)
    write_netcdf(ds, data)
    write_atomically(plot, lambda tmp: comparison_figure(ds, tmp))
    tables, notes = comparison_tables(ds)
    written = [str(p) for p in write_tables(tables, args.csv or str(folder))]
    if args.json:
        emit_json({"example": str(example_path()),
                   **report(ds, str(data), str(plot), scenario, written)})
        return 0
    print(f"Example scenario: {example_path()}")
    print_report(ds, tables, notes, {"NetCDF": str(data), "figure": str(plot),
                                     "tables": ", ".join(written)})
    print(f"Outputs: {data.resolve()} (open with xarray.open_dataset) and {plot.resolve()}")
    return 0
