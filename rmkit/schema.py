"""Every variable and dimension of every Dataset rmkit writes: one place for names, dims, units.

A variable has *core* dims (what one solve, one policy or one cell gives) and the workflows that
stack many of them put stacking dims in front: ``method`` (compare), ``policy`` and ``versus``
(paired comparisons), ``scenario``, ``method`` and ``seed`` (sweeps), ``setting`` (calibration).
So ``revenue`` is ``(path,)`` from one simulation, ``(policy, path)`` from ``compare_policies``,
``(method, path)`` from ``compare`` and ``(scenario, method, seed, path)`` from a sweep, with one
meaning and one unit everywhere. Labels a reader selects by are coordinates (ids along their dim,
``kind`` of each method along ``method``); provenance is in attrs. :func:`dataset` is the only
way rmkit builds its Datasets, and it refuses a name or a dim the schema does not know.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np


@dataclass(frozen=True)
class VariableSpec:
    dims: tuple[str, ...]
    units: str
    description: str


CURRENCY = "currency"
PER_SEAT = "currency per seat"

#: Dimension -> what runs along it.
DIMENSIONS: dict[str, str] = {
    "leg": "leg ids",
    "product": "product ids",
    "customer": "customer types of the demand model (product ids for independent demand)",
    "period": "booking periods 0..T-1 (from the period solved from)",
    "capacity": "seats left 0..max capacity",
    "bucket": "nesting buckets of a leg, 0 = the highest",
    "iteration": "iterations of an iterative method",
    "path": "simulated sample paths",
    "visit": "(period, state) pairs a policy visits",
    "method": "methods compared (stacking dim)",
    "policy": "policies compared (stacking dim)",
    "versus": "the other policy of a paired difference (stacking dim)",
    "scenario": "scenarios of a sweep (stacking dim)",
    "seed": "seeds of a sweep (stacking dim)",
    "setting": "settings evaluated by a calibration, in the order tried (stacking dim)",
}
STACKING_DIMS = ("scenario", "method", "policy", "versus", "seed", "setting")

_V = VariableSpec
#: Variable name -> core dims, units, meaning. The single source of truth for result labels.
VARIABLES: dict[str, VariableSpec] = {
    # ---- what a solver gives (rmkit.results.SolveResult)
    "value": _V((), CURRENCY, "optimum, upper bound or the method's own estimate of revenue to go"),
    "value_stderr": _V((), CURRENCY, "standard error of a sampled value"),
    "bid_price": _V(("leg",), PER_SEAT, "leg bid prices at the state solved from"),
    "bid_price_table": _V(("period", "capacity", "leg"), PER_SEAT,
                          "bid price by period and seats left on the leg"),
    "leg_value": _V(("period", "capacity", "leg"), CURRENCY,
                    "leg value to go at the start of a period"),
    "allocation": _V(("product",), "seats", "seats allocated to each product"),
    "net_fare": _V(("leg", "product"), CURRENCY, "fare a leg counts for a product"),
    "protection_level": _V(("leg", "bucket"), "seats",
                           "seats protected for buckets 0..b (nested, 0 = highest)"),
    "booking_limit": _V(("leg", "bucket"), "seats", "nested booking limit per bucket"),
    "product_bucket": _V(("leg", "product"), "1", "bucket of a product on a leg, -1 = none"),
    "bucket_fare": _V(("leg", "bucket"), CURRENCY, "representative fare of a bucket"),
    "multiplier": _V(("period", "leg", "product"), CURRENCY,
                     "Lagrange multipliers splitting fares over legs"),
    "bound_history": _V(("iteration",), CURRENCY, "bound after each iteration"),
    "gap_history": _V(("iteration",), "1", "relative gap after each iteration"),
    "opportunity_cost": _V(("product",), CURRENCY,
                           "displacement cost of selling one unit of a product"),
    # ---- what a simulation gives (rmkit.workflows.simulate)
    "revenue": _V(("path",), CURRENCY, "simulated revenue per path"),
    "accepted": _V(("path", "product"), "sales", "sales per path and product"),
    "no_purchase": _V(("path", "customer"), "customers",
                      "arrivals who bought nothing (refused requests, for independent demand)"),
    "seats_left": _V(("path", "leg"), "seats", "seats left at the end of the horizon"),
    "load_factor": _V(("path", "leg"), "1", "seats sold / capacity"),
    "revenue_mean": _V((), CURRENCY, "mean simulated revenue"),
    "revenue_stderr": _V((), CURRENCY, "standard error of the mean revenue"),
    "revenue_ci_low": _V((), CURRENCY, "95% confidence interval of the mean revenue, low end"),
    "revenue_ci_high": _V((), CURRENCY, "95% confidence interval of the mean revenue, high end"),
    "load_factor_mean": _V(("leg",), "1", "mean seats sold / capacity"),
    "solves": _V((), "1", "solves of the policy during the simulation"),
    "control": _V((), "", "booking control the simulator applied"),
    "parameters": _V((), "", "settings of the method (JSON)"),
    "difference_mean": _V((), CURRENCY, "mean paired revenue difference: this policy minus the "
                          "other (versus, or the best policy)"),
    "difference_stderr": _V((), CURRENCY, "paired standard error of the difference (common "
                            "random numbers)"),
    "difference_stderr_unpaired": _V((), CURRENCY, "standard error as if the two were independent"),
    "difference_ci_low": _V((), CURRENCY, "95% interval of the paired difference, low end"),
    "difference_ci_high": _V((), CURRENCY, "95% interval of the paired difference, high end"),
    "bound": _V((), CURRENCY, "upper bound or optimum the gaps are measured against"),
    "bound_stderr": _V((), CURRENCY, "standard error of a sampled bound"),
    "gap": _V((), CURRENCY, "bound - mean revenue"),
    "gap_percent": _V((), "%", "(bound or optimum - mean revenue) / bound or optimum x 100"),
    "gap_ci_low": _V((), CURRENCY, "95% interval of the gap, low end"),
    "gap_percent_stderr": _V((), "%", "standard error of gap_percent: the policy's sampling error "
                             "combined with a sampled bound's (paired on common streams where "
                             "it can be)"),
    "gap_percent_ci_low": _V((), "%", "95% interval of gap_percent, low end"),
    # ---- a sweep's gap table (rmkit.workflows.sweep.gaps)
    "bound_method": _V((), "", "the method that gave the tightest bound (or the optimum)"),
    "policy_method": _V((), "", "the policy with the highest mean simulated revenue"),
    "gap_pairing": _V((), "", "how a sampled bound's error entered the gap's interval: "
                      "deterministic bound, independent, or paired"),
    "gap_percent_ci_high": _V((), "%", "95% interval of gap_percent, high end"),
    "gap_ci_high": _V((), CURRENCY, "95% interval of the gap, high end"),
    # ---- what a comparison adds (rmkit.workflows.compare)
    "status": _V((), "", "what became of it: ran, skipped or failed (a cell: done, error, missing)"),
    "reason": _V((), "", "why a method was skipped or failed"),
    "check": _V((), "", "independent re-check of allocations and simulated paths"),
    "warning": _V((), "", "warnings raised while solving or simulating, counted"),
    "bid_price_error_mean": _V((), PER_SEAT, "visit-weighted mean absolute bid-price error"),
    "bid_price_error_max": _V((), PER_SEAT, "largest absolute bid-price error over visits"),
    "opportunity_cost_error_mean": _V((), CURRENCY,
                                      "visit-weighted mean absolute opportunity-cost error"),
    "opportunity_cost_error_max": _V((), CURRENCY,
                                     "largest absolute opportunity-cost error over visits"),
    "solve_seconds": _V((), "s", "wall time of the solve from period 0"),
    "simulate_seconds": _V((), "s", "wall time of the simulation (with re-solves)"),
    "seconds": _V((), "s", "wall time"),
    "compile_seconds": _V((), "s", "wall time spent compiling kernels (once per install), "
                          "kept out of the solve and simulate times"),
    "visit_period": _V(("visit",), "1", "period of a visited state"),
    "visit_capacity": _V(("visit", "leg"), "seats", "seats left in a visited state"),
    "visit_weight": _V(("visit",), "1", "share of (path, period) pairs in a visited state"),
    "exact_bid_price": _V(("visit", "leg"), PER_SEAT,
                          "V_{t+1}(x) - V_{t+1}(x - e_i) at a visit; NaN at 0 seats"),
    "exact_opportunity_cost": _V(("visit", "product"), CURRENCY,
                                 "V_{t+1}(x) - V_{t+1}(x - A_j) at a visit; NaN where not sellable"),
    "exact_bid_price_table": _V(("period", "capacity", "leg"), PER_SEAT,
                                "exact bid price by period and seats left on the leg: "
                                "visit-weighted mean over the states the optimal policy visits"),
    # ---- what a sweep cell adds (rmkit.workflows.sweep)
    "error": _V((), "", "error of a failed cell, or a solver's note"),
    "solver_status": _V((), "", "the solver's status of a value cell"),
    # ---- what a calibration adds (rmkit.workflows.calibrate)
    "fresh_revenue_mean": _V((), CURRENCY, "mean revenue re-measured on fresh paths"),
    "fresh_revenue_stderr": _V((), CURRENCY, "standard error of the fresh-path mean"),
    "fresh_gap_percent": _V((), "%", "(reference - fresh mean revenue) / reference x 100"),
    "improvement_mean": _V((), CURRENCY, "tuned - default revenue on fresh paths, paired"),
    "improvement_stderr": _V((), CURRENCY, "paired standard error of the improvement"),
    "improvement_ci_low": _V((), CURRENCY, "95% interval of the improvement, low end"),
    "improvement_ci_high": _V((), CURRENCY, "95% interval of the improvement, high end"),
}


class SchemaError(ValueError):
    """A Dataset variable that the schema does not know or whose dims break it."""


def variable(name: str, data: Any, lead: Sequence[str] = (), **extra_attrs: Any):
    """``name`` as an ``xarray.Variable`` with dims ``lead + core`` and the schema's attrs."""
    import xarray as xr

    spec = VARIABLES.get(name)
    if spec is None:
        raise SchemaError(f"unknown variable {name!r}; add it to rmkit.schema.VARIABLES")
    for d in lead:
        if d not in STACKING_DIMS:
            raise SchemaError(f"{name}: {d!r} is not a stacking dim ({', '.join(STACKING_DIMS)})")
    dims = (*lead, *spec.dims)
    arr = np.asarray(data, dtype=object) if isinstance(data, str) else np.asarray(data)
    if arr.ndim != len(dims):
        raise SchemaError(f"{name} needs dims {dims}, got shape {arr.shape}")
    attrs = {"description": spec.description}
    if spec.units:
        attrs["units"] = spec.units
    attrs.update(extra_attrs)
    return xr.Variable(dims, arr, attrs=attrs)


def dataset(data: Mapping[str, Any], *, lead: Sequence[str] = (),
            coords: Mapping[str, Any] | None = None, attrs: Mapping[str, Any] | None = None):
    """A Dataset of schema variables (each with dims ``lead + core``)."""
    import xarray as xr

    ds = xr.Dataset({name: variable(name, value, lead) for name, value in data.items()},
                    coords=dict(coords or {}))
    ds.attrs.update(attrs or {})
    return ds


def check(ds) -> list[str]:
    """What in ``ds`` breaks the schema: unknown variables, dims that are not stacking dims
    followed by the core dims, missing units. Empty when the Dataset follows it."""
    problems = []
    for name, var in ds.data_vars.items():
        spec = VARIABLES.get(name)
        if spec is None:
            problems.append(f"{name}: not in the schema")
            continue
        core = var.dims[len(var.dims) - len(spec.dims):] if spec.dims else ()
        lead = var.dims[: len(var.dims) - len(spec.dims)]
        if tuple(core) != spec.dims or any(d not in STACKING_DIMS for d in lead):
            problems.append(f"{name}: dims {var.dims}, expected stacking dims + {spec.dims}")
        if spec.units and var.attrs.get("units") != spec.units:
            problems.append(f"{name}: units {var.attrs.get('units')!r}, expected {spec.units!r}")
    for d in ds.dims:
        if d not in DIMENSIONS:
            problems.append(f"dim {d!r}: not in the schema")
    return problems
