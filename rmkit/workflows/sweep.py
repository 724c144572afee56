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

from __future__ import annotations

import glob
import hashlib
import itertools
import json
import math
import os
import time
import tomllib
import traceback
from collections.abc import Callable, Iterator, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
from pydantic import BaseModel, ConfigDict, ValidationError

from rmkit.cli._common import write_atomically
from rmkit.errors import InputError

STORE_FORMAT = 1
#: Status of a cell in the store: computed, failed (its error is recorded), or not computed yet.
CELL_STATUSES = ("done", "error", "missing")


# ------------------------------------------------------------------ grid file
class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)


class SweepInfo(_Strict):
    name: str = ""
    seeds: int | list[int] = [0]


class ScenarioEntry(_Strict):
    files: list[str] | None = None
    generator: str | None = None
    settings: dict[str, Any] = {}
    prefix: str = ""


class MethodEntry(_Strict):
    method: str
    params: dict[str, Any] = {}
    label: str = ""


class PolicyEntry(_Strict):
    method: str
    paths: int = 1000
    resolves: int | list[int] = 0
    params: dict[str, Any] = {}
    label: str = ""


class GridSpec(_Strict):
    sweep: SweepInfo = SweepInfo()
    scenario: list[ScenarioEntry]
    method: list[MethodEntry] = []
    policy: list[PolicyEntry] = []


def _grid_error(err: ValidationError) -> InputError:
    first = err.errors()[0]
    where = ""
    for part in first["loc"]:
        where += f"[{part}]" if isinstance(part, int) else ("." if where else "") + str(part)
    if first["type"] == "extra_forbidden":
        return InputError(f"grid {where}: unknown field; see the layout in 'rmkit sweep --help'")
    if first["type"] == "missing":
        return InputError(f"grid {where}: is required but missing")
    return InputError(f"grid {where}: {first['msg'].lower()}, got {first.get('input')!r}")


@dataclass(frozen=True)
class MethodSpec:
    """One value of the ``method`` coordinate: a solver's value, or a simulated policy."""

    label: str
    kind: str  # "value" (solve once, record its value) or "policy" (simulate the control)
    method: str
    params: dict[str, Any] = field(default_factory=dict)
    paths: int = 0
    resolve: int = 0


@dataclass(frozen=True)
class ScenarioRef:
    """Where a scenario comes from: a file, or a generator family with settings."""

    label: str
    file: str = ""
    generator: str = ""
    settings: dict[str, Any] = field(default_factory=dict)

    def load(self):
        if self.file:
            from rmkit.model.scenario import load_scenario

            return load_scenario(self.file)
        from rmkit.model.generators import generate

        return generate(self.generator, **self.settings)


@dataclass(frozen=True)
class Grid:
    """An expanded grid: ordered coordinate labels and what each label stands for."""

    name: str
    scenarios: tuple[ScenarioRef, ...]
    methods: tuple[MethodSpec, ...]
    seeds: tuple[int, ...]

    @property
    def n_cells(self) -> int:
        return len(self.scenarios) * len(self.methods) * len(self.seeds)


def _unique(labels: list[str], what: str, fix: str) -> None:
    seen: set[str] = set()
    for label in labels:
        if label in seen:
            raise InputError(f"grid {what}: two entries are labelled {label!r}; {fix}")
        seen.add(label)


def _file_label(path: str) -> str:
    name = Path(path).name
    for suffix in (".gz", ".txt", ".toml"):
        if name.lower().endswith(suffix):
            name = name[: -len(suffix)]
    return name


def _expand_scenarios(spec: GridSpec, folder: Path) -> list[ScenarioRef]:
    from rmkit.model.generators import GENERATORS

    out: list[ScenarioRef] = []
    for i, entry in enumerate(spec.scenario):
        where = f"scenario[{i}]"
        if (entry.files is None) == (entry.generator is None):
            raise InputError(f"grid {where}: give exactly one of 'files' or 'generator'")
        if entry.files is not None:
            if entry.settings:
                raise InputError(f"grid {where}.settings: only generator entries take settings")
            if not entry.files:
                raise InputError(f"grid {where}.files: list at least one path or glob")
            for j, pattern in enumerate(entry.files):
                full = pattern if os.path.isabs(pattern) else str(folder / pattern)
                found = sorted(glob.glob(full))
                if not found:
                    raise InputError(
                        f"grid {where}.files[{j}]: {pattern!r} matches no file (looked in {folder})"
                    )
                out.extend(
                    ScenarioRef(label=entry.prefix + _file_label(p), file=str(Path(p).resolve()))
                    for p in found
                )
            continue
        if entry.generator not in GENERATORS:
            raise InputError(
                f"grid {where}.generator: unknown family {entry.generator!r}; "
                f"valid: {', '.join(GENERATORS)}"
            )
        keys = sorted(entry.settings)
        axes = [v if isinstance(v, list) and k != "fares" else [v]
                for k, v in ((k, entry.settings[k]) for k in keys)]
        for combo in itertools.product(*axes):
            settings = dict(zip(keys, combo, strict=True))
            scenario = ScenarioRef(label="", generator=entry.generator, settings=settings).load()
            out.append(ScenarioRef(label=entry.prefix + scenario.name, generator=entry.generator,
                                   settings=settings))
    _unique([s.label for s in out], "scenario", "set a distinct 'prefix' on the [[scenario]] entries")
    return out


def _expand_methods(spec: GridSpec) -> list[MethodSpec]:
    from rmkit.methods.base import get_solver

    out: list[MethodSpec] = []
    for m in spec.method:
        get_solver(m.method, **m.params)  # unknown method or parameter name fails here, not later
        out.append(MethodSpec(label=m.label or m.method, kind="value", method=m.method,
                              params=dict(m.params)))
    for i, p in enumerate(spec.policy):
        where = f"policy[{i}]"
        try:
            from rmkit.workflows.policies import make_policy
        except ImportError:  # pragma: no cover - the simulator ships with rmkit
            raise InputError(f"grid {where}: this rmkit has no policy simulator") from None
        make_policy(p.method, dict(p.params))  # unknown policy or setting fails here
        if p.paths < 1:
            raise InputError(f"grid {where}.paths: must be >= 1, got {p.paths}")
        resolves = p.resolves if isinstance(p.resolves, list) else [p.resolves]
        if not resolves or any(r < 0 for r in resolves):
            raise InputError(f"grid {where}.resolves: give whole numbers >= 0, got {p.resolves!r}")
        if p.label and len(resolves) > 1:
            raise InputError(f"grid {where}.label: one label cannot name {len(resolves)} resolves")
        for r in resolves:
            label = p.label or (f"{p.method}-policy" + (f"-r{r}" if r else ""))
            out.append(MethodSpec(label=label, kind="policy", method=p.method, params=dict(p.params),
                                  paths=p.paths, resolve=r))
    if not out:
        raise InputError("grid: lists no [[method]] and no [[policy]]; add at least one")
    _unique([m.label for m in out], "method", "set a distinct 'label' on the entries")
    return out


def grid_from_dict(data: dict[str, Any], folder: str | Path = ".") -> Grid:
    """Validate a grid (the parsed TOML) and expand it; paths are relative to ``folder``."""
    try:
        spec = GridSpec.model_validate(data)
    except ValidationError as err:
        raise _grid_error(err) from None
    seeds = spec.sweep.seeds
    seeds = list(range(seeds)) if isinstance(seeds, int) else list(seeds)
    if not seeds or any(s < 0 for s in seeds):
        raise InputError(f"grid sweep.seeds: give a count >= 1 or whole numbers >= 0, got {seeds!r}")
    if len(set(seeds)) != len(seeds):
        raise InputError(f"grid sweep.seeds: seeds repeat in {seeds!r}")
    return Grid(
        name=spec.sweep.name,
        scenarios=tuple(_expand_scenarios(spec, Path(folder))),
        methods=tuple(_expand_methods(spec)),
        seeds=tuple(int(s) for s in seeds),
    )


def load_grid(path: str | Path) -> Grid:
    """Read and expand a grid file (see the module docstring for its layout)."""
    p = Path(path)
    if not p.is_file():
        raise InputError(f"{p}: no such grid file; give the path of a sweep grid .toml")
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as err:
        raise InputError(f"{p}: malformed TOML: {err}") from None
    grid = grid_from_dict(data, p.resolve().parent)
    return grid if grid.name else Grid(p.stem, grid.scenarios, grid.methods, grid.seeds)


# ------------------------------------------------------------------ cells and seeds
def derived_seed(*parts: Any) -> int:
    """A seed in [0, 2**63) that depends only on ``parts`` (a stable hash through SeedSequence)."""
    digest = hashlib.sha256(json.dumps(parts, sort_keys=True).encode("utf-8")).digest()
    state = np.random.SeedSequence(int.from_bytes(digest[:16], "little")).generate_state(
        1, np.uint64
    )
    return int(state[0] >> np.uint64(1))


def scenario_fingerprint(network, demand) -> str:
    """Hash of everything in a scenario that changes a result (ids, capacities, fares, demand)."""
    h = hashlib.sha256()
    h.update(json.dumps([network.leg_ids, network.product_ids]).encode("utf-8"))
    # the demand's own arrays (for independent demand its request table, as before kinds existed,
    # so stored cell ids stay valid)
    for a in (network.incidence, network.capacities, network.fares, *demand.content_arrays()):
        h.update(np.ascontiguousarray(a).tobytes())
    return h.hexdigest()[:16]


@dataclass(frozen=True)
class Cell:
    scenario: str
    method: MethodSpec
    seed: int
    fingerprint: str

    @property
    def cell_id(self) -> str:
        key = [STORE_FORMAT, self.scenario, self.fingerprint, asdict(self.method), self.seed]
        return hashlib.sha256(json.dumps(key, sort_keys=True, default=str).encode()).hexdigest()[:24]

    @property
    def solver_seed(self) -> int:
        return derived_seed("solver", self.scenario, self.method.label, self.seed)

    @property
    def demand_seed(self) -> int:
        return derived_seed("demand", self.scenario, self.seed)


@dataclass(frozen=True)
class CellTask:
    """What a worker needs for one cell: the cell and its scenario's network and demand."""

    cell: Cell
    network: Any
    demand: Any


def scenario_data(network, demand) -> tuple[Any, Any]:
    """A task that holds one scenario: its cells depend on it, so each worker fetches the
    scenario once, and the scheduler can recompute it if the worker holding it dies."""
    return network, demand


def run_cell_on(cell: Cell, problem: tuple[Any, Any]) -> dict[str, Any]:
    """:func:`run_cell` with the scenario given as the result of :func:`scenario_data`."""
    return run_cell(CellTask(cell, *problem))


def run_cell(task: CellTask) -> dict[str, Any]:
    """Compute one cell on a worker; a failure becomes a record with its error, never a raise."""
    spec = task.cell.method
    record: dict[str, Any] = {
        "value": math.nan, "value_stderr": math.nan, "seconds": math.nan, "status": "error",
        "solver_status": "", "error": "", "traceback": "", "revenue": None,
        "host": os.uname().nodename,
        "pid": os.getpid(),
    }
    start = time.perf_counter()
    try:
        if spec.kind == "value":
            record.update(_solve_value(task))
        else:
            record.update(_simulate_policy(task))
    except Exception as err:  # recorded in the store: the sweep goes on with the other cells
        record["status"] = "error"
        record["error"] = f"{type(err).__name__}: {err}"
        record["traceback"] = traceback.format_exc(limit=8)
    record["seconds"] = time.perf_counter() - start
    return record


def _solve_value(task: CellTask) -> dict[str, Any]:
    import warnings

    from rmkit.methods.base import get_solver

    spec = task.cell.method
    solver = get_solver(spec.method, **spec.params)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        res = solver.solve(task.network, task.demand, seed=task.cell.solver_seed)
    notes = [res.message] + [str(w.message) for w in caught]
    return {
        "value": res.value,
        "value_stderr": math.nan if res.stderr is None else res.stderr,
        "status": "error" if res.status == "error" else "done",
        "solver_status": res.status,
        "error": "; ".join(n for n in notes if n)[:2000] if res.status != "optimal" else "",
    }


def _simulate_policy(task: CellTask) -> dict[str, Any]:
    from rmkit.workflows.simulate import simulate

    spec = task.cell.method
    ds = simulate(task.network, task.demand, spec.method, paths=spec.paths,
                  seed=task.cell.demand_seed, resolve=spec.resolve, params=spec.params)
    return {
        "value": float(ds["revenue_mean"]),
        "value_stderr": float(ds["revenue_stderr"]),
        "status": "done",
        "revenue": np.asarray(ds["revenue"].values, dtype=np.float64),
    }


# ------------------------------------------------------------------ the store
class Store:
    """The result folder: one NetCDF per finished cell plus an append-only index."""

    def __init__(self, root: str | Path) -> None:
        self.root = Path(root)
        self.cells = self.root / "cells"
        self.index = self.root / "index.jsonl"

    def create(self, grid: Grid, cells: Sequence[Cell]) -> None:
        if self.root.exists() and not self.root.is_dir():
            raise InputError(f"--out: {self.root} exists and is not a folder; give a folder path")
        if self.root.is_dir() and any(self.root.iterdir()) and not (self.root / "grid.json").exists():
            raise InputError(
                f"--out: {self.root} is a folder with other files in it, not a sweep store; "
                "give a new or empty folder"
            )
        self.cells.mkdir(parents=True, exist_ok=True)
        layout = {
            "format": STORE_FORMAT,
            "name": grid.name,
            "scenarios": [asdict(s) for s in grid.scenarios],
            "methods": [asdict(m) for m in grid.methods],
            "seeds": list(grid.seeds),
            "cells": [c.cell_id for c in cells],
        }
        text = json.dumps(layout, indent=1, default=str)
        write_atomically(self.root / "grid.json", lambda tmp: Path(tmp).write_text(text, "utf-8"))

    def layout(self) -> dict[str, Any]:
        path = self.root / "grid.json"
        if not path.is_file():
            raise InputError(f"{self.root}: not a sweep store (no grid.json); run 'rmkit sweep'")
        return json.loads(path.read_text("utf-8"))

    def cell_path(self, cell_id: str) -> Path:
        return self.cells / f"{cell_id}.nc"

    def stored_ids(self) -> set[str]:
        return {p.name[:-3] for p in self.cells.glob("*.nc")}

    def statuses(self) -> dict[str, str]:
        """Status of each stored cell: from the index, else read from the cell file."""
        known: dict[str, str] = {}
        if self.index.is_file():
            for line in self.index.read_text("utf-8").splitlines():
                try:
                    row = json.loads(line)
                except json.JSONDecodeError:  # a line cut short by a crash: the file decides
                    continue
                known[row["cell"]] = row["status"]
        out = {}
        for cid in self.stored_ids():
            out[cid] = known.get(cid) or str(_read_cell(self.cell_path(cid))["status"])
        return out

    def write(self, cell: Cell, record: dict[str, Any]) -> None:
        ds = _cell_dataset(cell, record)
        write_atomically(self.cell_path(cell.cell_id),
                      lambda tmp: ds.to_netcdf(tmp, engine="h5netcdf"))
        row = {"cell": cell.cell_id, "scenario": cell.scenario, "method": cell.method.label,
               "seed": cell.seed, "status": record["status"], "time": time.time()}
        with open(self.index, "a", encoding="utf-8") as fh:
            fh.write(json.dumps(row) + "\n")
            fh.flush()
            os.fsync(fh.fileno())


def _cell_dataset(cell: Cell, record: dict[str, Any]):
    import xarray as xr

    from rmkit._version import __version__

    data = {name: float(record[name]) for name in ("value", "value_stderr", "seconds")}
    data_vars: dict[str, Any] = {k: ((), v) for k, v in data.items()}
    if record.get("revenue") is not None:
        data_vars["revenue"] = (("path",), np.asarray(record["revenue"], dtype=np.float64))
    attrs = {
        "cell_id": cell.cell_id, "scenario": cell.scenario, "method": cell.method.label,
        "seed": int(cell.seed), "kind": cell.method.kind, "solver": cell.method.method,
        "parameters": json.dumps(cell.method.params, sort_keys=True, default=str),
        "paths": int(cell.method.paths), "resolve": int(cell.method.resolve),
        "status": str(record["status"]), "solver_status": str(record.get("solver_status", "")),
        "error": str(record["error"]),
        "traceback": str(record["traceback"]), "scenario_fingerprint": cell.fingerprint,
        "solver_seed": str(cell.solver_seed), "demand_seed": str(cell.demand_seed),
        "host": str(record.get("host", "")), "pid": int(record.get("pid", -1)),
        "rmkit_version": __version__,
    }
    return xr.Dataset(data_vars, attrs=attrs)


def _read_cell(path: Path) -> dict[str, Any]:
    import h5netcdf

    with h5netcdf.File(path, "r") as f:
        out: dict[str, Any] = {k: f.attrs[k] for k in f.attrs}
        for name in ("value", "value_stderr", "seconds"):
            out[name] = float(f.variables[name][()])
        out["revenue"] = np.asarray(f.variables["revenue"][:]) if "revenue" in f.variables else None
    return out


# ------------------------------------------------------------------ running
@dataclass
class SweepReport:
    """What a run did: cells in the grid, found already stored, computed now, and failed."""

    store: Path
    total: int
    resumed: int = 0
    computed: int = 0
    failed: int = 0
    seconds: float = 0.0
    interrupted: bool = False
    cell_ids: tuple[str, ...] = ()
    failures: list[tuple[str, str, int, str]] = field(default_factory=list)


class SweepInterrupted(KeyboardInterrupt):
    """Ctrl-C during a sweep; ``report`` says what was stored (rerun the command to resume)."""

    def __init__(self, report: SweepReport) -> None:
        self.report = report
        self.stored = len(Store(report.store).stored_ids() & set(report.cell_ids))
        super().__init__(f"interrupted with {self.stored} of {report.total} cells stored in "
                         f"{report.store}")


def expand_cells(grid: Grid) -> tuple[list[Cell], dict[str, Any]]:
    """Every cell of the grid in (scenario, method, seed) order, and the loaded scenarios."""
    loaded = {}
    cells = []
    for ref in grid.scenarios:
        scenario = ref.load()
        loaded[ref.label] = scenario
        fp = scenario_fingerprint(scenario.network, scenario.demand)
        for m in grid.methods:
            for s in grid.seeds:
                cells.append(Cell(scenario=ref.label, method=m, seed=s, fingerprint=fp))
    return cells, loaded


def _start_client(scheduler: str | None, workers: int | None):
    import logging

    from distributed import Client, LocalCluster

    if scheduler:
        try:
            return Client(scheduler, timeout="20s"), None
        except OSError as err:
            raise InputError(
                f"--scheduler: cannot reach a dask scheduler at {scheduler!r} ({err}); check the "
                "address (tcp://HOST:PORT) and that the scheduler is running"
            ) from None
    n = workers or os.cpu_count() or 1
    if n < 1:
        raise InputError(f"--workers: must be >= 1, got {n}")
    cluster = LocalCluster(
        n_workers=n, threads_per_worker=1, processes=True, dashboard_address=":0",
        silence_logs=logging.ERROR,
    )
    return Client(cluster), cluster


def run_sweep(
    grid: Grid,
    store: str | Path,
    *,
    scheduler: str | None = None,
    workers: int | None = None,
    retry_failed: bool = False,
    progress: bool = True,
    on_stored: Callable[[Cell, dict[str, Any]], None] | None = None,
) -> SweepReport:
    """Compute every cell of ``grid`` not yet in ``store``, writing each as soon as it finishes.

    Parameters
    ----------
    scheduler
        Address of a running dask scheduler (``tcp://host:8786``); default: start a local cluster.
    workers
        Worker processes of the local cluster (default: one per CPU); ignored with ``scheduler``.
    retry_failed
        Recompute cells stored with status ``error`` (default: keep their recorded error).
    on_stored
        Called in the client after each cell is written (progress hooks, tests).
    """
    started = time.perf_counter()
    cells, scenarios = expand_cells(grid)
    st = Store(store)
    st.create(grid, cells)
    statuses = st.statuses()
    todo = [c for c in cells if c.cell_id not in statuses
            or (retry_failed and statuses[c.cell_id] == "error")]
    report = SweepReport(store=st.root, total=len(cells), resumed=len(cells) - len(todo),
                         cell_ids=tuple(c.cell_id for c in cells))
    if todo:
        _compute(todo, scenarios, st, report, scheduler, workers, progress, on_stored)
    if not report.interrupted:
        write_combined(st.root)
    report.seconds = time.perf_counter() - started
    return report


def _preload() -> str:
    """Run on every worker before the cells: import the solvers and the simulator once, so a
    cell's ``seconds`` measure its own work, and report the worker's rmkit version."""
    import rmkit.workflows.simulate  # noqa: F401
    from rmkit._version import __version__
    from rmkit.methods.base import load_all

    load_all()
    return __version__


def _rmkit_version() -> str:
    from rmkit._version import __version__

    return __version__


def _check_workers(client) -> None:
    import warnings

    from rmkit._version import __version__

    try:
        # the scheduler unpickles task graphs, so it needs rmkit as much as the workers do
        versions = {"scheduler": client.run_on_scheduler(_rmkit_version), **client.run(_preload)}
    except Exception as err:  # the scheduler relays an ImportError as a plain Exception
        if "rmkit" not in str(err):
            raise
        raise InputError(
            f"--scheduler: the cluster cannot import rmkit ({err}); install rmkit {__version__} "
            "where the scheduler and every worker run"
        ) from None
    other = sorted({v for v in versions.values() if v != __version__})
    if other:
        warnings.warn(f"the cluster runs rmkit {', '.join(other)}, this client {__version__}; "
                      "results may differ from a local run", stacklevel=3)


def _compute(todo, scenarios, st, report, scheduler, workers, progress, on_stored) -> None:
    from distributed import wait

    client, cluster = _start_client(scheduler, workers)
    futures = {}
    try:
        _check_workers(client)
        held = {}
        for cell in todo:
            if cell.scenario not in held:
                sc = scenarios[cell.scenario]
                held[cell.scenario] = client.submit(
                    scenario_data, sc.network, sc.demand,
                    key=f"rmkit-scenario-{cell.fingerprint}-{len(held)}", pure=False)
            fut = client.submit(run_cell_on, cell, held[cell.scenario],
                                key=f"rmkit-cell-{cell.cell_id}", pure=False)
            futures[fut.key] = (fut, cell)
        with _Progress(len(todo), report.resumed, enabled=progress) as bar:
            pending = dict(futures)
            while pending:
                try:
                    wait([f for f, _ in pending.values()], timeout=0.5, return_when="FIRST_COMPLETED")
                except TimeoutError:  # nothing finished within the poll: refresh the bar
                    pass
                for fut in [f for f, _ in pending.values() if f.done()]:
                    cell = pending.pop(fut.key)[1]
                    record = _collect(fut)
                    st.write(cell, record)
                    report.computed += 1
                    if record["status"] == "error":
                        report.failed += 1
                        report.failures.append(
                            (cell.scenario, cell.method.label, cell.seed, record["error"]))
                    if on_stored is not None:
                        on_stored(cell, record)
                bar.update(report.computed, report.failed, _running(client, pending))
    except KeyboardInterrupt:
        import logging

        report.interrupted = True
        # Ctrl-C: the user wants a prompt, not the cluster's connection-closed tracebacks
        logging.getLogger("distributed").setLevel(logging.CRITICAL)
        for fut, _ in futures.values():
            fut.cancel()
        raise SweepInterrupted(report) from None
    finally:
        client.close()
        if cluster is not None:
            cluster.close()


def _collect(fut) -> dict[str, Any]:
    """The cell's record, or an error record when the task itself was lost (e.g. KilledWorker)."""
    try:
        return fut.result()
    except Exception as err:
        return {"value": math.nan, "value_stderr": math.nan, "seconds": math.nan,
                "status": "error", "error": f"{type(err).__name__}: {err}",
                "traceback": traceback.format_exc(limit=4), "revenue": None}


def _running(client, pending: dict) -> int:
    try:
        busy = client.processing()
    except Exception:  # a scheduler hiccup must not stop the sweep; the count is only shown
        return 0
    keys = {str(k) for ks in busy.values() for k in ks}
    return sum(1 for k in pending if str(k) in keys)


class _Progress:
    """A rich progress bar: cells done, running, failed, elapsed and time left."""

    def __init__(self, total: int, resumed: int, enabled: bool) -> None:
        self.total, self.resumed, self.enabled = total, resumed, enabled
        self._bar = None

    def __enter__(self) -> _Progress:
        if self.enabled:
            from rich.console import Console
            from rich.progress import (
                BarColumn,
                MofNCompleteColumn,
                Progress,
                TextColumn,
                TimeElapsedColumn,
                TimeRemainingColumn,
            )

            self._bar = Progress(
                TextColumn("cells"), BarColumn(), MofNCompleteColumn(),
                TextColumn("running {task.fields[running]}  failed {task.fields[failed]}"),
                TextColumn("elapsed"), TimeElapsedColumn(), TextColumn("left"), TimeRemainingColumn(),
                console=Console(stderr=True), transient=False,
            )
            self._bar.start()
            self._task = self._bar.add_task("sweep", total=self.total, running=0, failed=0)
            if self.resumed:
                self._bar.console.print(f"resuming: {self.resumed} cells already stored")
        return self

    def update(self, done: int, failed: int, running: int) -> None:
        if self._bar is not None:
            self._bar.update(self._task, completed=done, running=running, failed=failed)

    def __exit__(self, *exc: object) -> None:
        if self._bar is not None:
            self._bar.stop()


# ------------------------------------------------------------------ reading results
def open_sweep(store: str | Path, *, paths: bool = False):
    """The stored sweep as one Dataset with dims (scenario, method, seed).

    Variables: ``value`` (optimum, bound or mean simulated revenue), ``value_stderr``,
    ``seconds``, ``status`` (one of :data:`CELL_STATUSES`), ``error`` (message of a failed cell,
    or a solver's note) and ``solver_status`` (the solver's status of a value cell); method
    coordinates ``kind``, ``solver``, ``paths`` and ``resolve``. With ``paths=True`` the
    per-path revenue of policy cells is added along a ``path`` dim (NaN-padded).

    Select methods with a dict, ``ds.sel({"method": "dlp"})``: ``method`` is also a keyword of
    ``Dataset.sel``.
    """
    import xarray as xr

    st = Store(store)
    layout = st.layout()
    scen = [s["label"] for s in layout["scenarios"]]
    meth = layout["methods"]
    seeds = layout["seeds"]
    shape = (len(scen), len(meth), len(seeds))
    num = {k: np.full(shape, np.nan) for k in ("value", "value_stderr", "seconds")}
    status = np.full(shape, "missing", dtype=object)
    error = np.full(shape, "", dtype=object)
    solver_status = np.full(shape, "", dtype=object)
    revenue: dict[tuple[int, int, int], np.ndarray] = {}
    stored = st.stored_ids()
    ids = iter(layout["cells"])
    for idx in np.ndindex(*shape):
        cid = next(ids)
        if cid not in stored:
            continue
        rec = _read_cell(st.cell_path(cid))
        for k in num:
            num[k][idx] = rec[k]
        status[idx] = str(rec["status"])
        error[idx] = str(rec["error"])
        solver_status[idx] = str(rec.get("solver_status", ""))
        if paths and rec["revenue"] is not None:
            revenue[idx] = rec["revenue"]
    dims = ("scenario", "method", "seed")
    data_vars: dict[str, Any] = {k: (dims, v) for k, v in num.items()}
    data_vars["status"] = (dims, status.astype(str))
    data_vars["error"] = (dims, error.astype(str))
    data_vars["solver_status"] = (dims, solver_status.astype(str))
    if paths and revenue:
        n = max(r.size for r in revenue.values())
        full = np.full((*shape, n), np.nan)
        for idx, r in revenue.items():
            full[(*idx, slice(0, r.size))] = r
        data_vars["revenue"] = ((*dims, "path"), full)
    coords = {
        "scenario": scen,
        "method": [m["label"] for m in meth],
        "seed": np.asarray(seeds, dtype=np.int64),
        "kind": ("method", [m["kind"] for m in meth]),
        "solver": ("method", [m["method"] for m in meth]),
        "paths": ("method", np.asarray([m["paths"] for m in meth], dtype=np.int64)),
        "resolve": ("method", np.asarray([m["resolve"] for m in meth], dtype=np.int64)),
    }
    from rmkit._version import __version__

    ds = xr.Dataset(data_vars, coords=coords)
    ds["value"].attrs.update(units="currency",
                             description="optimum, bound or value of a method; mean revenue of a policy")
    ds["value_stderr"].attrs.update(units="currency", description="standard error of a sampled value")
    ds["seconds"].attrs.update(units="s", description="wall time of the cell on its worker")
    ds.attrs.update(name=layout["name"], store_format=layout["format"], rmkit_version=__version__,
                    n_cells=int(status.size), n_missing=int((status == "missing").sum()),
                    n_failed=int((status == "error").sum()))
    return ds


def write_combined(store: str | Path) -> Path:
    """Write ``sweep.nc`` (the combined Dataset) into the store, atomically."""
    st = Store(store)
    ds = open_sweep(st.root)
    target = st.root / "sweep.nc"
    write_atomically(target, lambda tmp: ds.to_netcdf(tmp, engine="h5netcdf"))
    return target


def summary_by_method(ds):
    """Per method: cells, failed, mean value, mean standard error and mean seconds per cell."""
    import xarray as xr

    ok = ds["status"] != "error"
    ok = ok & (ds["status"] != "missing")
    dims = ("scenario", "seed")
    return xr.Dataset({
        "cells": ds["status"].count(dims),
        "done": ok.sum(dims),
        "failed": (ds["status"] == "error").sum(dims),
        "mean_value": ds["value"].where(ok).mean(dims),
        "mean_stderr": ds["value_stderr"].where(ok).mean(dims),
        "mean_seconds": ds["seconds"].where(ok).mean(dims),
    })


def value_table(ds):
    """Mean value over seeds, by scenario and method (a (scenario, method) DataArray)."""
    ok = (ds["status"] != "error") & (ds["status"] != "missing")
    return ds["value"].where(ok).mean("seed")


def iter_failures(ds) -> Iterator[tuple[str, str, int, str]]:
    """(scenario, method, seed, error) of every failed cell."""
    status = ds["status"].values
    for idx in zip(*np.nonzero(status == "error"), strict=True):
        i, j, k = (int(v) for v in idx)
        yield (str(ds.scenario.values[i]), str(ds.method.values[j]), int(ds.seed.values[k]),
               str(ds["error"].values[i, j, k]))
