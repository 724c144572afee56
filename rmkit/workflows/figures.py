"""Figures of a simulation, a calibration and a sweep (matplotlib's Agg back end).

Each reads only the Dataset the workflow returned (or a saved NetCDF of it), so a figure can
be drawn again later. The comparison figure is in :mod:`rmkit.workflows.plots`.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from rmkit.workflows.drawing import pyplot, save

if TYPE_CHECKING:  # pragma: no cover
    import xarray as xr


def simulation_figure(ds: xr.Dataset, path: str | Path | None = None, *, dpi: int = 150):
    """Revenue per path (histogram, mean and 95% interval) and mean load factor by leg."""
    plt = pyplot()
    a = ds.attrs
    revenue = ds["revenue"].values
    with plt.style.context("seaborn-v0_8-whitegrid"):
        fig, (left, right) = plt.subplots(1, 2, figsize=(12, 4.8), layout="constrained",
                                          width_ratios=[1.3, 1.0])
        left.hist(revenue, bins=min(40, max(10, revenue.size // 25)), color="tab:blue",
                  alpha=0.75)
        mean, lo, hi = (float(ds[v]) for v in ("revenue_mean", "revenue_ci_low",
                                               "revenue_ci_high"))
        left.axvline(mean, color="black", lw=2, label=f"mean {mean:,.0f}")
        if math.isfinite(lo):
            left.axvspan(lo, hi, color="black", alpha=0.15,
                         label=f"95% interval of the mean ({lo:,.0f} to {hi:,.0f})")
        left.set_xlabel("revenue per departure (currency)")
        left.set_ylabel("simulated paths")
        left.set_title("revenue per path", fontsize=11)
        left.legend(fontsize=8, loc="upper left")
        load = ds["load_factor_mean"].values
        from rmkit.workflows.plots import leg_label

        legs = [leg_label(ds, str(v)) for v in ds.leg.values]
        y = np.arange(len(legs))
        right.barh(y, load, color="tab:green", alpha=0.8)
        for k, v in enumerate(load):
            if math.isfinite(v):
                right.annotate(f"{v:.0%}", (v, k), xytext=(3, 0), textcoords="offset points",
                               va="center", fontsize=8)
        right.set_yticks(y, legs, fontsize=8 if len(legs) > 12 else 9)
        right.invert_yaxis()
        right.set_xlim(0, 1.12)
        right.set_xlabel("load factor: seats sold / capacity (mean over paths)")
        right.set_title("load factor by leg", fontsize=11)
        fig.suptitle(f"{a.get('network', '')}: policy {a.get('policy', '')}, "
                     f"{a.get('paths', '?')} paths, {a.get('resolves_done', 0)} re-solves, "
                     f"seed {a.get('seed', '?')}", fontsize=12)
    return save(fig, path, dpi)


def calibration_figure(ds: xr.Dataset, path: str | Path | None = None, *, dpi: int = 150):
    """Mean revenue on the search paths over the settings tried, default and tuned marked."""
    import json

    plt = pyplot()
    a = ds.attrs
    searched = list(json.loads(a["searched"]))
    mean, se = ds["revenue_mean"].values, ds["revenue_stderr"].values
    default, tuned = int(a["default_setting"]), int(a["tuned_setting"])
    numeric = (len(searched) == 1 and all(isinstance(v, (int, float, np.integer, np.floating))
                                          for v in ds[searched[0]].values))
    with plt.style.context("seaborn-v0_8-whitegrid"):
        fig, ax = plt.subplots(figsize=(9, 5), layout="constrained")
        if numeric:
            x = np.asarray(ds[searched[0]].values, dtype=float)
            order = np.argsort(x)
            ax.errorbar(x[order], mean[order], yerr=1.96 * se[order], fmt="o-", ms=4,
                        color="tab:blue", alpha=0.8, capsize=2, label="settings tried")
            ax.set_xlabel(searched[0])
            xs = x
        else:
            order = np.argsort(-mean)
            xs = np.empty(mean.size)
            xs[order] = np.arange(mean.size)
            ax.errorbar(xs[order], mean[order], yerr=1.96 * se[order], fmt="o", ms=5,
                        color="tab:blue", capsize=2, label="settings tried")
            labels = [str(v) for v in ds["label"].values]
            ax.set_xticks(np.arange(mean.size), [labels[q] for q in order], rotation=45,
                          ha="right", fontsize=7)
            ax.set_xlabel("setting (best first)")
        ax.plot(xs[default], mean[default], "s", ms=11, mfc="none", mec="black", mew=2,
                label="default")
        ax.plot(xs[tuned], mean[tuned], "*", ms=16, color="tab:red", label="tuned")
        ref = float(a.get("reference_value", math.nan))
        if math.isfinite(ref):
            kind = a.get("reference_kind", "")
            ax.axhline(ref, color="black", ls=":", lw=1.5,
                       label=f"{'optimum (DP value)' if kind == 'optimum' else 'best bound'} "
                       f"{ref:,.0f}")
        ax.set_ylabel("mean revenue on the search paths (95% interval)")
        ax.legend(fontsize=8)
        ax.set_title(f"calibrating {a['heuristic']}: {a['evaluations']} settings on {a['paths']} "
                     f"paths (seed {a['seed']}); fresh-path figures are in the table", fontsize=11)
    return save(fig, path, dpi)


def sweep_figure(ds: xr.Dataset, path: str | Path | None = None, *, dpi: int = 150):
    """Method x scenario panel: each value as a percentage of the scenario's lowest upper bound
    (else of its optimum, else of its best value), with the value written in each cell."""
    from rmkit.workflows.sweep import value_table

    plt = pyplot()
    values = value_table(ds)
    v = np.asarray(values.values, dtype=float)  # (scenario, method)
    kinds = [str(k) for k in ds["kind"].values]
    measures = [str(m) for m in ds["measure"].values]
    bounds = [q for q, (k, m) in enumerate(zip(kinds, measures, strict=True))
              if m == "value" and k in ("optimum", "upper bound")]
    with np.errstate(all="ignore"):
        base = np.nanmin(v[:, bounds], axis=1) if bounds else np.nanmax(v, axis=1)
        share = 100.0 * v / base[:, None]
    scen = [str(s) for s in values.scenario.values]
    meth = [str(m) + (" (policy)" if measures[q] == "policy" else "")
            for q, m in enumerate(values.method.values)]
    with plt.style.context("default"):
        fig, ax = plt.subplots(figsize=(1.3 * len(meth) + 3, 0.45 * len(scen) + 2.2),
                               layout="constrained")
        image = ax.imshow(share, cmap="viridis", aspect="auto")
        for i in range(len(scen)):
            for j in range(len(meth)):
                if math.isfinite(v[i, j]):
                    ax.text(j, i, f"{v[i, j]:,.0f}\n{share[i, j]:.1f}%", ha="center",
                            va="center", fontsize=7,
                            color="white" if share[i, j] < np.nanmean(share) else "black")
        ax.set_xticks(np.arange(len(meth)), meth, rotation=30, ha="right", fontsize=8)
        ax.set_yticks(np.arange(len(scen)), scen, fontsize=8)
        what = "the lowest upper bound or the optimum" if bounds else "the best value"
        fig.colorbar(image, ax=ax, label=f"% of {what} of the scenario")
        ax.set_title(f"{ds.attrs.get('name', '')}: value by scenario and method (mean over "
                     "seeds)", fontsize=11)
    return save(fig, path, dpi)
