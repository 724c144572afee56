"""The ranked table of a comparison: one row per method, read from the Dataset alone.

Simulated policies come first by mean revenue, then bounds, then methods that did not run; each
row carries what a reader concludes from it (a significant paired difference, the gap's 95%
interval). Works on a Dataset from :func:`rmkit.workflows.compare.compare` or a NetCDF file of
one, so saved comparisons can be tabled again.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

from rmkit.methods.base import assumption_label
from rmkit.workflows.compare import ERROR_NAMES

if TYPE_CHECKING:  # pragma: no cover
    import xarray as xr


def _estimates(row: dict[str, Any], attrs: Mapping[str, Any]) -> dict[str, Any]:
    """What a reader concludes from a row: whether its paired difference from the best policy
    is significant (the 95% interval excludes 0), and its gap's 95% interval (stored with the
    row, see :func:`compare`; files written before it was stored get ``100 (ref - revenue CI) /
    ref``, without the yardstick's own error)."""
    low, high = row["difference_ci_low"], row["difference_ci_high"]
    significant = None if low is None or high is None else bool(low > 0 or high < 0)
    if row.get("gap_percent_ci_low") is not None:
        return {"difference_significant": significant}
    ref = float(attrs.get("reference_value", math.nan))
    gap_low = gap_high = None
    if math.isfinite(ref) and ref and row["revenue_ci_low"] is not None:
        gap_low = 100.0 * (ref - row["revenue_ci_high"]) / ref
        gap_high = 100.0 * (ref - row["revenue_ci_low"]) / ref
    return {"difference_significant": significant, "gap_percent_ci_low": gap_low,
            "gap_percent_ci_high": gap_high}


def ranked(ds: xr.Dataset) -> list[dict[str, Any]]:
    """One row per method: simulated ones by mean revenue (best first), then bounds, then skipped."""
    rows = []
    for q, name in enumerate(ds.method.values.tolist()):
        d = ds.isel(method=q)
        row = {"method": name, "kind": str(d["kind"].values), "status": str(d["status"].values),
               "reason": str(d["reason"].values), "check": str(d["check"].values),
               "warning": str(d["warning"].values)}
        approximation = (str(d["assumes_independent_demand"].values)
                         if "assumes_independent_demand" in d.coords else "")
        row["assumes_independent_demand"] = approximation or None
        row["label"] = assumption_label(approximation)
        for var in ("value", "value_stderr", "revenue_mean", "revenue_stderr", "revenue_ci_low",
                    "revenue_ci_high", "difference_mean", "difference_stderr",
                    "difference_ci_low", "difference_ci_high", "gap_percent",
                    "gap_percent_stderr", "gap_percent_ci_low", "gap_percent_ci_high",
                    *ERROR_NAMES, "solve_seconds", "simulate_seconds", "compile_seconds"):
            v = float(d[var].values) if var in d else math.nan
            row[var] = v if math.isfinite(v) else None
        row.update(_estimates(row, ds.attrs))
        rows.append(row)

    def order(row: dict[str, Any]) -> tuple[int, float]:
        if row["status"] != "ran":
            return (3, 0.0)
        if row["revenue_mean"] is not None:
            return (0, -row["revenue_mean"])
        return (1, row["value"] if row["value"] is not None else math.inf)

    rows.sort(key=order)
    for rank, row in enumerate(rows, start=1):
        row["rank"] = rank if row["revenue_mean"] is not None else None
    return rows
