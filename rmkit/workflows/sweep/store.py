"""The result folder of a sweep: one NetCDF per finished cell plus an index.

A cell file is trusted only when it reads back whole and its own ``cell_id`` (and scenario
fingerprint) match the name it is stored under: a truncated, garbled or misplaced file is set
aside as ``<id>.nc.corrupt`` (kept as evidence) and its cell computed again. The index holds one
row per cell: a cell stored again replaces its row (the index is rewritten atomically).
"""

from __future__ import annotations

import json
import os
import time
from collections.abc import Sequence
from dataclasses import asdict
from pathlib import Path
from typing import Any

import numpy as np

from rmkit.errors import InputError
from rmkit.files import check_output_folder, write_atomically
from rmkit.workflows.sweep.cells import STORE_FORMAT, Cell
from rmkit.workflows.sweep.grid import Grid

#: Status of a cell in the store: computed, failed (its error is recorded), or not computed yet.
CELL_STATUSES = ("done", "error", "missing")


class CorruptCell(Exception):
    """A cell file that cannot be trusted: unreadable, or holding another cell."""

    def __init__(self, cell_id: str, why: str) -> None:
        super().__init__(f"cell {cell_id}: {why}")
        self.cell_id, self.why = cell_id, why


class Store:
    """The result folder: one NetCDF per finished cell plus an append-only index."""

    def __init__(self, root: str | Path) -> None:
        self.root = Path(root)
        self.cells = self.root / "cells"
        self.index = self.root / "index.jsonl"

    def create(self, grid: Grid, cells: Sequence[Cell]) -> None:
        if self.root.exists() and not self.root.is_dir():
            raise InputError(f"store: {self.root} exists and is not a folder; give a folder path")
        if self.root.is_dir() and any(self.root.iterdir()) and not (self.root / "grid.json").exists():
            raise InputError(
                f"store: {self.root} is a folder with other files in it, not a sweep store; "
                "give a new or empty folder"
            )
        check_output_folder(self.root, "store")
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

    def read(self, cell_id: str, fingerprint: str | None = None) -> dict[str, Any]:
        """The stored record of a cell; :class:`CorruptCell` when its file cannot be read whole
        or belongs to another cell (its own ``cell_id`` or scenario fingerprint differ)."""
        path = self.cell_path(cell_id)
        try:
            record = read_cell(path)
        except Exception as err:  # h5py raises OSError, KeyError, ValueError ... on bad bytes
            raise CorruptCell(cell_id, f"unreadable ({type(err).__name__})") from None
        if str(record.get("cell_id", "")) != cell_id:
            raise CorruptCell(cell_id, f"holds cell {str(record.get('cell_id', ''))!r}")
        if fingerprint is not None and str(record.get("scenario_fingerprint")) != fingerprint:
            raise CorruptCell(cell_id, "holds another version of the scenario")
        return record

    def set_aside_bad(self, cells: Sequence[Cell]) -> list[str]:
        """Move every stored cell file that :meth:`read` refuses to ``<id>.nc.corrupt`` (its
        cell is then missing and computed again); return the ids moved."""
        moved = []
        stored = self.stored_ids()
        for cell in cells:
            if cell.cell_id not in stored:
                continue
            try:
                self.read(cell.cell_id, cell.fingerprint)
            except CorruptCell:
                path = self.cell_path(cell.cell_id)
                target = path.with_name(path.name + ".corrupt")
                n = 1
                while target.exists():  # keep every earlier piece of evidence too
                    n += 1
                    target = path.with_name(f"{path.name}.corrupt{n}")
                os.replace(path, target)
                moved.append(cell.cell_id)
        return moved

    def index_rows(self) -> dict[str, dict[str, Any]]:
        """The index's row of each cell (the last one, should a crash have left two)."""
        rows: dict[str, dict[str, Any]] = {}
        if self.index.is_file():
            for line in self.index.read_text("utf-8").splitlines():
                try:
                    row = json.loads(line)
                except json.JSONDecodeError:  # a line cut short by a crash: the file decides
                    continue
                if isinstance(row, dict) and "cell" in row and "status" in row:
                    rows[str(row["cell"])] = row
        return rows

    def indexed(self) -> dict[str, str]:
        """Status of each cell named in the index."""
        return {cid: str(row["status"]) for cid, row in self.index_rows().items()}

    def reconcile(self, cells: Sequence[Cell]) -> None:
        """Index the stored cells the index misses (a run stopped between writing a cell's file
        and its index row, e.g. by Ctrl-C)."""
        known = self.indexed()
        for cell in cells:
            if cell.cell_id not in known and self.cell_path(cell.cell_id).is_file():
                self._append(cell, str(self.read(cell.cell_id)["status"]))

    def statuses(self) -> dict[str, str]:
        """Status of each stored cell: from the index, else read from the cell file."""
        known = self.indexed()
        out = {}
        for cid in self.stored_ids():
            out[cid] = known.get(cid) or str(self.read(cid)["status"])
        return out

    def write(self, cell: Cell, record: dict[str, Any]) -> None:
        ds = _cell_dataset(cell, record)
        write_atomically(self.cell_path(cell.cell_id),
                      lambda tmp: ds.to_netcdf(tmp, engine="h5netcdf"))
        self._append(cell, str(record["status"]))

    def _append(self, cell: Cell, status: str) -> None:
        row = {"cell": cell.cell_id, "scenario": cell.scenario, "method": cell.method.label,
               "seed": cell.seed, "status": status, "time": time.time()}
        rows = self.index_rows()
        if cell.cell_id in rows:  # stored again (deleted, set aside or retried): replace its row
            rows[cell.cell_id] = row
            text = "".join(json.dumps(r) + "\n" for r in rows.values())
            write_atomically(self.index, lambda tmp: Path(tmp).write_text(text, "utf-8"))
            return
        with open(self.index, "a", encoding="utf-8") as fh:
            fh.write(json.dumps(row) + "\n")
            fh.flush()
            os.fsync(fh.fileno())


def _cell_dataset(cell: Cell, record: dict[str, Any]):
    from rmkit import schema
    from rmkit._version import __version__

    data: dict[str, Any] = {name: float(record[name]) for name in ("value", "value_stderr",
                                                                     "seconds")}
    if record.get("revenue") is not None:
        data["revenue"] = np.asarray(record["revenue"], dtype=np.float64)
    attrs = {
        "cell_id": cell.cell_id, "scenario": cell.scenario, "method": cell.method.label,
        "seed": int(cell.seed), "measure": cell.method.kind, "solver": cell.method.method,
        "parameters": json.dumps(cell.method.params, sort_keys=True, default=str),
        "paths": int(cell.method.paths), "resolve": int(cell.method.resolve),
        "status": str(record["status"]), "solver_status": str(record.get("solver_status", "")),
        "error": str(record["error"]),
        "traceback": str(record["traceback"]), "scenario_fingerprint": cell.fingerprint,
        "solver_seed": str(cell.solver_seed), "demand_seed": str(cell.demand_seed),
        "host": str(record.get("host", "")), "pid": int(record.get("pid", -1)),
        "rmkit_version": __version__,
    }
    return schema.dataset(data, attrs=attrs)


def read_cell(path: Path) -> dict[str, Any]:
    import h5netcdf

    with h5netcdf.File(path, "r") as f:
        out: dict[str, Any] = {k: f.attrs[k] for k in f.attrs}
        for name in ("value", "value_stderr", "seconds"):
            out[name] = float(f.variables[name][()])
        out["revenue"] = np.asarray(f.variables["revenue"][:]) if "revenue" in f.variables else None
    return out
