"""Cells of a sweep: their seeds, ids and what a worker computes for one."""

from __future__ import annotations

import hashlib
import json
import math
import os
import time
import traceback
from dataclasses import asdict, dataclass
from typing import Any

import numpy as np

from rmkit.workflows.sweep.grid import Grid, MethodSpec

STORE_FORMAT = 1


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
    solver = get_solver(spec.method, **spec.params).for_value()  # a bound: no policy replayed
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
