"""``rmkit demo``: the main job end to end on the bundled example scenario.

Runs ``rmkit compare`` on the invented Tallowmere hub (4 legs, 12 products, 300 periods, small
enough for the exact DP), writes the comparison as NetCDF and the figure as PNG into a folder and
prints the ranked table and where the files went.
"""

from __future__ import annotations

import argparse
from importlib import resources
from pathlib import Path

from rmkit.cli._common import add_json, emit_json
from rmkit.cli.compare import add_compare_options, print_report, report, run_comparison

HELP = "compare every method on the bundled example; write the table, NetCDF and figure"

#: Demo sizes: every method, 1000 paths each and no re-solves finish well within a minute here.
DEMO_PATHS = 1000
DEMO_RESOLVE = 0
DATA_FILE = "comparison.nc"
PLOT_FILE = "comparison.png"


def example_path() -> Path:
    """Path of the bundled example scenario (installed with the package)."""
    return Path(str(resources.files("rmkit") / "examples" / "tallowmere.toml"))


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_compare_options(parser, paths=DEMO_PATHS, resolve=DEMO_RESOLVE)
    parser.add_argument("--out-dir", default="rmkit-demo",
                        help="folder for comparison.nc and comparison.png (default ./rmkit-demo)")
    add_json(parser)


def run(args: argparse.Namespace) -> int:
    from rmkit.cli._common import write_netcdf
    from rmkit.errors import InputError
    from rmkit.files import check_output_folder, write_atomically
    from rmkit.model.scenario import load_scenario
    from rmkit.workflows.plots import comparison_figure

    folder = Path(args.out_dir)
    if folder.exists() and not folder.is_dir():
        raise InputError(f"--out-dir: {folder} exists and is not a folder; pick another path")
    check_output_folder(folder, "--out-dir")
    scenario = load_scenario(example_path())
    ds = run_comparison(scenario, args, quiet=args.json)
    folder.mkdir(parents=True, exist_ok=True)
    data, plot = folder / DATA_FILE, folder / PLOT_FILE
    write_netcdf(ds, data)
    write_atomically(plot, lambda tmp: comparison_figure(ds, tmp))
    if args.json:
        emit_json({"example": str(example_path()), **report(ds, str(data), str(plot))})
        return 0
    print(f"Example scenario: {example_path()}")
    print_report(ds, str(data), str(plot))
    print(f"Outputs: {data.resolve()} (open with xarray.open_dataset) and {plot.resolve()}")
    return 0
