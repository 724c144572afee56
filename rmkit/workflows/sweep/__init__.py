"""Experiment sweeps: every (scenario, method, seed) cell of a grid as one task on dask.distributed.

A grid file names scenarios, methods (their value: an optimum, a bound or a heuristic's estimate),
policies (bid-price controls simulated over sample paths, with re-solves) and seeds. Each cell runs
as one task, on a local cluster of worker processes or on an existing cluster at a scheduler
address, and is written to the result store the moment it finishes. Rerunning the same command
resumes: only cells without a stored result are computed.

Grid layout (TOML; unknown keys are refused)::

    [sweep]                name (optional); seeds = [0, 1, 2] or a count (3 means 0, 1, 2)
    [[scenario]]           files = ["paths or globs", ...] relative to the grid file, or
                           generator = "hub-spoke" | "line" with settings = { ... }: a list
                           value sweeps that setting (every combination is generated);
                           prefix = "..." (optional) is put before the scenario labels
    [[method]]             method = "dlp", params = { ... }, label = "..." (optional)
    [[policy]]             method = "dlp", paths = 500, resolves = [0, 5] (or one number),
                           params = { ... }, label = "..." (optional; one resolve only)

Reproducibility. A cell's random seeds are functions of its coordinates only, never of the order
in which cells are scheduled: ``SeedSequence(sha256(json(parts)))`` gives the solver seed from
(scenario, method, seed) and the demand-path seed from (scenario, seed); the latter is shared by
every policy of a scenario and seed, so policies are compared on common random numbers. One worker
or many give the same numbers.

Store layout (a folder)::

    grid.json              the expanded grid: coordinate labels and the cell ids, in order
    cells/<cell id>.nc     one NetCDF per finished cell, written to a temporary file and renamed
    index.jsonl            one line per stored cell (id, labels, status), appended after the file
    sweep.nc               the combined Dataset, rewritten when a run completes

A cell id is a hash of everything that determines the cell's numbers (labels, the scenario's
contents, the method and its settings), so a cell is stored at most once, and editing a scenario
or a setting makes new cells instead of reusing stale ones.
"""

from rmkit.workflows.sweep.cells import Cell, derived_seed, expand_cells, scenario_fingerprint
from rmkit.workflows.sweep.gaps import gap_table, write_gap_table
from rmkit.workflows.sweep.grid import Grid, MethodSpec, ScenarioRef, grid_from_dict, load_grid
from rmkit.workflows.sweep.read import (
    iter_failures,
    open_sweep,
    summary_by_method,
    value_table,
    write_combined,
)
from rmkit.workflows.sweep.runner import SweepInterrupted, SweepReport, run_sweep
from rmkit.workflows.sweep.store import CELL_STATUSES, Store

__all__ = [
    "CELL_STATUSES", "Cell", "Grid", "MethodSpec", "ScenarioRef", "Store", "SweepInterrupted",
    "SweepReport", "derived_seed", "expand_cells", "gap_table", "grid_from_dict", "iter_failures",
    "load_grid", "open_sweep", "run_sweep", "scenario_fingerprint", "summary_by_method", "value_table",
    "write_combined", "write_gap_table",
]
