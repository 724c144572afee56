"""Reading a sweep store back: the combined Dataset and summaries of it."""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np

from rmkit.errors import InputError
from rmkit.files import write_atomically
from rmkit.workflows.sweep.store import CorruptCell, Store


def open_sweep(store: str | Path, *, paths: bool = False):
    """The stored sweep as one Dataset with dims (scenario, method, seed).

    Variables: ``value`` (optimum, bound or mean simulated revenue), ``value_stderr``,
    ``seconds``, ``status`` (one of ``CELL_STATUSES``), ``error`` (message of a failed cell,
    or a solver's note) and ``solver_status`` (the solver's status of a value cell); method
    coordinates ``measure`` (``value``: the solver's own value; ``policy``: its simulated
    revenue), ``kind`` (the solver's kind: optimum, upper bound or heuristic, as in ``compare``),
    ``assumes_independent_demand`` (the approximation of a method run through the
    independent-demand view, ``""`` otherwise), ``solver``, ``paths`` and ``resolve``. With ``paths=True`` the
    per-path revenue of policy cells is added along a ``path`` dim (NaN-padded).

    Select methods with a dict, ``ds.sel({"method": "dlp"})``: ``method`` is also a keyword of
    ``Dataset.sel``.
    """
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
        try:
            rec = st.read(cid)
        except CorruptCell as bad:
            raise InputError(f"store: {st.cell_path(cid)}: {bad.why}; run 'rmkit sweep' on the "
                             "grid again to set it aside and compute the cell anew") from None
        for k in num:
            num[k][idx] = rec[k]
        status[idx] = str(rec["status"])
        error[idx] = str(rec["error"])
        solver_status[idx] = str(rec.get("solver_status", ""))
        if paths and rec["revenue"] is not None:
            revenue[idx] = rec["revenue"]
    from rmkit import schema
    from rmkit._version import __version__
    from rmkit.methods.base import get_solver, is_method_name, kind_of

    solvers = {m["method"]: get_solver(m["method"]) if is_method_name(m["method"]) else None
               for m in meth}
    data: dict[str, Any] = dict(num)
    data["status"] = status.astype(str)
    data["error"] = error.astype(str)
    data["solver_status"] = solver_status.astype(str)
    if paths and revenue:
        n = max(r.size for r in revenue.values())
        full = np.full((*shape, n), np.nan)
        for idx, r in revenue.items():
            full[(*idx, slice(0, r.size))] = r
        data["revenue"] = full
    coords = {
        "scenario": scen,
        "method": [m["label"] for m in meth],
        "seed": np.asarray(seeds, dtype=np.int64),
        "measure": ("method", [m["kind"] for m in meth]),
        "kind": ("method", [kind_of(solvers[m["method"]]) if solvers[m["method"]] else ""
                            for m in meth]),
        "assumes_independent_demand": ("method", [
            solvers[m["method"]].tags.assumes_independent_demand if solvers[m["method"]] else ""
            for m in meth]),
        "solver": ("method", [m["method"] for m in meth]),
        "paths": ("method", np.asarray([m["paths"] for m in meth], dtype=np.int64)),
        "resolve": ("method", np.asarray([m["resolve"] for m in meth], dtype=np.int64)),
    }
    ds = schema.dataset(data, lead=("scenario", "method", "seed"), coords=coords)
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
