"""The certified-gap table of a sweep: per scenario, the tightest bound against the best policy.

For every scenario of a sweep Dataset (:func:`rmkit.workflows.sweep.open_sweep` with
``paths=True``):

* the **best bound** is the optimum when an ``optimum`` method (``exact``) ran on it, else the
  lowest ``upper bound`` value among the value cells that finished (mean over seeds; a sampled
  bound's standard error over seeds is ``sqrt(sum se_s^2) / S``);
* the **best policy** is the policy cell with the highest mean simulated revenue, its paths
  pooled over the seeds (every policy of a scenario and seed runs on the same request streams,
  so the choice compares like with like; picking the best of several noisy means is a small
  optimistic bias, of the order of a standard error);
* the **gap** is ``100 (bound - mean revenue) / bound`` with a 95% interval from
  :func:`rmkit.workflows.stats.gap_estimate`. In a sweep a sampled bound (``ir``, ``ph``) is
  drawn with its own solver seed, on streams other than the policies', so its standard error is
  combined in quadrature, ``sqrt(se_policy^2 + se_bound^2)`` (``pairing = "independent"``); a
  deterministic bound (``lr``, ``alp``, ``dlp``) leaves the policy's error alone. Every bound is
  above the optimum, so the interval's upper end is a 95% upper confidence limit on the policy's
  true optimality gap.

The summary is the **median** and the **maximum** gap over the scenarios with a gap (point
estimates; the maximum's interval is that scenario's). :func:`write_gap_table` writes the table
to NetCDF and CSV (one row per scenario, then a ``median`` and a ``maximum`` row) and draws the
gap per scenario with its interval to a PNG.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from rmkit.errors import InputError

if TYPE_CHECKING:  # pragma: no cover
    import xarray as xr

#: Variables of the gap table along ``scenario`` (all in :mod:`rmkit.schema`).
GAP_VARIABLES = (
    "bound_method", "bound", "bound_stderr", "policy_method", "revenue_mean", "revenue_stderr",
    "gap_percent", "gap_percent_stderr", "gap_percent_ci_low", "gap_percent_ci_high",
    "gap_pairing",
)
CSV_COLUMNS = [
    "instance", "best bound", "bound value", "bound std. error", "best policy", "policy mean",
    "policy std. error", "gap %", "gap % 95% low", "gap % 95% high", "gap % std. error",
    "pairing",
]


def _done(ds, name: str) -> np.ndarray:
    status = ds["status"].sel({"method": name}).values
    return status == "done"


def _pooled_bound(ds, scenario: str, method: str) -> tuple[float, float]:
    cell = ds.sel({"scenario": scenario, "method": method})
    ok = cell["status"].values == "done"
    values = cell["value"].values[ok]
    values = values[np.isfinite(values)]
    if values.size == 0:
        return math.nan, math.nan
    se = cell["value_stderr"].values[ok][: values.size]
    se = np.where(np.isfinite(se), se, 0.0)
    return float(values.mean()), float(math.sqrt(float(np.sum(se**2))) / values.size)


def _pooled_revenue(ds, scenario: str, method: str) -> np.ndarray:
    cell = ds.sel({"scenario": scenario, "method": method})
    ok = cell["status"].values == "done"
    revenue = cell["revenue"].values[ok]  # (seed, path), NaN-padded
    revenue = revenue[np.isfinite(revenue)]
    return revenue


def gap_table(ds: xr.Dataset) -> xr.Dataset:
    """The gap table of a sweep Dataset (see the module docstring): dims ``scenario`` and,
    for every method's mean value over seeds, ``method`` (``value``); attrs hold the median and
    the maximum gap and where the maximum is."""

    from rmkit import schema
    from rmkit.workflows.stats import gap_estimate

    if "revenue" not in ds:
        raise InputError("gap table: the sweep has no simulated policy paths; add a [[policy]] "
                         "entry to the grid (and open the store with paths=True)")
    kinds = dict(zip(ds.method.values.tolist(), ds["kind"].values.tolist(), strict=True))
    measures = dict(zip(ds.method.values.tolist(), ds["measure"].values.tolist(), strict=True))
    bounds = [m for m in kinds if measures[m] == "value" and kinds[m] in ("optimum",
                                                                          "upper bound")]
    policies = [m for m in kinds if measures[m] == "policy"]
    if not bounds or not policies:
        raise InputError("gap table: the sweep needs at least one bound ([[method]] with an "
                         "upper bound or the optimum, e.g. lr, alp, dlp, ir) and one [[policy]]")
    rows: dict[str, list[Any]] = {name: [] for name in GAP_VARIABLES}
    for sc in ds.scenario.values.tolist():
        found = {m: _pooled_bound(ds, sc, m) for m in bounds}
        found = {m: v for m, v in found.items() if math.isfinite(v[0])}
        optimum = [m for m in found if kinds[m] == "optimum"]
        if optimum:
            best_b = optimum[0]
        elif found:
            best_b = min(found, key=lambda m: found[m][0])
        else:
            best_b = ""
        revenue = {m: _pooled_revenue(ds, sc, m) for m in policies}
        revenue = {m: r for m, r in revenue.items() if r.size}
        best_p = max(revenue, key=lambda m: float(revenue[m].mean())) if revenue else ""
        value, stderr = found.get(best_b, (math.nan, math.nan))
        r = revenue.get(best_p, np.array([]))
        g = gap_estimate(r, value, stderr)
        n = r.size
        rows["bound_method"].append(best_b)
        rows["bound"].append(value)
        rows["bound_stderr"].append(stderr)
        rows["policy_method"].append(best_p)
        rows["revenue_mean"].append(float(r.mean()) if n else math.nan)
        rows["revenue_stderr"].append(float(r.std(ddof=1) / math.sqrt(n)) if n > 1 else math.nan)
        rows["gap_percent"].append(g.percent)
        rows["gap_percent_stderr"].append(g.percent_stderr)
        rows["gap_percent_ci_low"].append(g.percent_ci_low)
        rows["gap_percent_ci_high"].append(g.percent_ci_high)
        rows["gap_pairing"].append(g.pairing)
    data = {k: np.asarray(v, dtype=object if k in ("bound_method", "policy_method", "gap_pairing")
                          else np.float64) for k, v in rows.items()}
    ok = (ds["status"] == "done")
    value = ds["value"].where(ok).mean("seed")
    out = schema.dataset(data, lead=("scenario",), coords={"scenario": ds.scenario.values})
    out["value"] = schema.variable("value", value.values, ("scenario", "method"))
    out = out.assign_coords(method=ds.method.values, kind=("method", ds["kind"].values),
                            measure=("method", ds["measure"].values))
    gaps = out["gap_percent"].values
    finite = np.isfinite(gaps)
    summary: dict[str, Any] = {"gap_median": math.nan, "gap_max": math.nan, "gap_max_scenario": "",
                               "scenarios_with_gap": int(finite.sum())}
    if finite.any():
        k = int(np.nanargmax(gaps))
        summary.update(gap_median=float(np.median(gaps[finite])), gap_max=float(gaps[k]),
                       gap_max_scenario=str(out.scenario.values[k]))
    out.attrs.update(ds.attrs)
    out.attrs.update(summary)
    out.attrs["confidence"] = 0.95
    out.attrs["bounds"] = ", ".join(bounds)
    out.attrs["policies"] = ", ".join(policies)
    return out


def gap_rows(table: xr.Dataset) -> list[list[Any]]:
    """CSV rows of :data:`CSV_COLUMNS`: one per scenario, then ``median`` and ``maximum``."""
    rows = []
    for q, sc in enumerate(table.scenario.values.tolist()):
        d = table.isel(scenario=q)
        rows.append([sc, str(d["bound_method"].values), float(d["bound"]),
                     float(d["bound_stderr"]), str(d["policy_method"].values),
                     float(d["revenue_mean"]), float(d["revenue_stderr"]),
                     float(d["gap_percent"]), float(d["gap_percent_ci_low"]),
                     float(d["gap_percent_ci_high"]), float(d["gap_percent_stderr"]),
                     str(d["gap_pairing"].values)])
    a = table.attrs
    blank = [None] * 6
    rows.append(["median", *blank, a["gap_median"], None, None, None, ""])
    worst = a["gap_max_scenario"]
    if worst:
        d = table.sel(scenario=worst)
        rows.append([f"maximum ({worst})", *blank, a["gap_max"],
                     float(d["gap_percent_ci_low"]), float(d["gap_percent_ci_high"]),
                     float(d["gap_percent_stderr"]), str(d["gap_pairing"].values)])
    else:
        rows.append(["maximum", *blank, math.nan, None, None, None, ""])
    return rows


def gap_figure(table: xr.Dataset, path: str | Path | None = None, *, dpi: int = 150):
    """The gap per scenario with its 95% interval, coloured by the best policy, and the median
    and maximum as lines."""
    from rmkit.workflows.drawing import pyplot, save

    plt = pyplot()
    names = [str(s) for s in table.scenario.values]
    gap = table["gap_percent"].values
    low, high = table["gap_percent_ci_low"].values, table["gap_percent_ci_high"].values
    policy = [str(p) for p in table["policy_method"].values]
    colours = {p: plt.get_cmap("tab10")(k) for k, p in enumerate(dict.fromkeys(policy))}
    with plt.style.context("seaborn-v0_8-whitegrid"):
        fig, ax = plt.subplots(figsize=(max(6.0, 0.32 * len(names) + 2.5), 4.8),
                               layout="constrained")
        x = np.arange(len(names))
        for p, colour in colours.items():
            sel = np.array([q == p for q in policy])
            ax.errorbar(x[sel], gap[sel], yerr=[gap[sel] - low[sel], high[sel] - gap[sel]],
                        fmt="o", color=colour, capsize=3, label=f"best policy: {p}")
        med, mx = table.attrs["gap_median"], table.attrs["gap_max"]
        if math.isfinite(med):
            ax.axhline(med, color="black", lw=1, ls="--", label=f"median {med:.2f}%")
            ax.axhline(mx, color="tab:red", lw=1, ls=":", label=f"maximum {mx:.2f}%")
        ax.axhline(0.0, color="grey", lw=0.8)
        ax.set_xlim(-0.6, len(names) - 0.4)
        ax.set_xticks(x, names, rotation=70, ha="right", fontsize=7)
        ax.set_ylabel("gap to the best bound (% of the bound)")
        ax.set_title(f"{table.attrs.get('name') or 'sweep'}: best policy vs best bound, "
                     "95% intervals", fontsize=11)
        ax.legend(fontsize=8, loc="upper left")
    return save(fig, path, dpi)


def write_gap_table(table: xr.Dataset, prefix: str | Path) -> dict[str, Path]:
    """Write ``PREFIX.nc``, ``PREFIX.csv`` and ``PREFIX.png`` (each atomically); return them."""
    import csv
    import io

    from rmkit.files import write_atomically

    prefix = Path(prefix)
    if prefix.suffix in (".nc", ".csv", ".png"):
        prefix = prefix.with_suffix("")
    targets = {kind: prefix.with_name(prefix.name + "." + kind) for kind in ("nc", "csv", "png")}
    write_atomically(targets["nc"], lambda tmp: table.to_netcdf(tmp, engine="h5netcdf"))
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(CSV_COLUMNS)
    for row in gap_rows(table):
        writer.writerow(["" if v is None or (isinstance(v, float) and math.isnan(v)) else v
                         for v in row])
    write_atomically(targets["csv"],
                     lambda tmp: Path(tmp).write_text(buffer.getvalue(), encoding="utf-8"))
    write_atomically(targets["png"], lambda tmp: gap_figure(table, tmp))
    return targets
