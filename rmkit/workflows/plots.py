"""Figures of a comparison (:func:`rmkit.workflows.compare.compare`), drawn with matplotlib's Agg back end.

:func:`comparison_figure` draws, for one leg, the bid price over the booking horizon at a few
remaining capacities, each method against the exact marginal value (where the optimal policy
goes), and below them the simulated revenue of each policy with its 95% confidence interval
against the optimum or the best upper bound. Only the Dataset is read, so a saved NetCDF file
can be plotted again later.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from rmkit.errors import InputError

if TYPE_CHECKING:  # pragma: no cover
    import xarray as xr

#: Fractions of the leg's capacity shown when no capacities are given.
DEFAULT_FRACTIONS = (0.2, 0.5, 0.8)


def busiest_leg(ds: xr.Dataset) -> str:
    """The leg the optimal (else best) policy fills most: where bid prices matter most."""
    load = ds["load_factor_mean"]
    order = [ds.attrs.get("reference_method", ""), ds.attrs.get("best_policy", "")]
    for name in order:
        if name and name in ds.method.values.tolist():
            row = load.sel({"method": name}).values
            if np.isfinite(row).any():
                return str(ds.leg.values[int(np.nanargmax(row))])
    return str(ds.leg.values[0])


def default_capacities(capacity: int) -> list[int]:
    picks = sorted({min(capacity, max(1, round(f * capacity))) for f in DEFAULT_FRACTIONS})
    return picks or [capacity]


def _leg_capacity(ds: xr.Dataset, leg: str) -> int:
    """The leg's capacity, read off the tables (NaN above capacity) or the largest visit."""
    table = ds["bid_price_table"].sel(leg=leg)
    defined = np.isfinite(table.values) | np.isinf(table.values)
    seats = np.flatnonzero(defined.any(axis=(0, 1)))
    if "visit_capacity" in ds:
        seats = np.union1d(seats, [int(ds["visit_capacity"].sel(leg=leg).max())])
    return int(seats.max()) if seats.size else 0


def comparison_figure(
    ds: xr.Dataset,
    path: str | Path | None = None,
    *,
    leg: str | None = None,
    capacities: list[int] | None = None,
    dpi: int = 150,
):
    """Draw the comparison; save it to ``path`` (PNG) when given. Returns the Figure."""
    from rmkit.workflows.drawing import pyplot

    plt = pyplot()

    legs = ds.leg.values.tolist()
    leg = busiest_leg(ds) if leg is None else leg
    if leg not in legs:
        raise InputError(f"leg: unknown leg id {leg!r}; known legs: {', '.join(legs)}")
    cap = _leg_capacity(ds, leg)
    capacities = default_capacities(cap) if capacities is None else list(capacities)
    bad = [x for x in capacities if not 1 <= int(x) <= cap]
    if bad:
        raise InputError(f"capacities: seats left on leg {leg!r} must be in [1, {cap}], got {bad}")

    methods = ds.method.values.tolist()
    colours = {m: style["color"] for m, style in method_styles(ds).items()}
    with plt.style.context("seaborn-v0_8-whitegrid"):
        fig = plt.figure(figsize=(4.6 * max(len(capacities), 2) + 2.5, 8.8),
                         layout="constrained")
        grid = fig.add_gridspec(2, len(capacities), height_ratios=[1.1, 1.0])
        axes = [fig.add_subplot(grid[0, k]) for k in range(len(capacities))]
        for k, (ax, x) in enumerate(zip(axes, capacities, strict=True)):
            _bid_price_panel(ax, ds, leg, int(x), method_styles(ds))
            if k:
                ax.set_ylabel("")
        seen: dict[str, Any] = {}
        for ax in axes:  # one legend for the panels: every method once
            for handle, label in zip(*ax.get_legend_handles_labels(), strict=True):
                seen.setdefault(label, handle)
        nested = [m for q, m in enumerate(methods) if _control(ds, q) == "nested"
                  and str(ds["status"].isel(method=q).values) == "ran"]
        if nested:  # their control is nested limits: a bid-price line would misstate it
            seen[f"{', '.join(nested)}: nested\nlimits, not drawn"] = plt.Line2D([], [],
                                                                                 ls="none")
        fig.legend(list(seen.values()), list(seen), loc="outside right upper", fontsize=9,
                   frameon=True, title="bid prices")
        _revenue_panel(fig.add_subplot(grid[1, :]), ds, colours)
        against = {"optimum": "the optimum", "best bound": "the best upper bound"}.get(
            ds.attrs.get("reference_kind", ""), "each other")
        title = (f"{ds.attrs.get('scenario', '')}: methods against {against}; bid prices on "
                 f"leg {leg_label(ds, leg)}")
        sub = (f"{ds.attrs.get('paths', '?')} simulated paths, common random numbers, "
               f"{ds.attrs.get('resolve', 0)} re-solves, seed {ds.attrs.get('seed', '?')};\nthe "
               "exact curve stops where the optimal policy does not go (fewer than 5 visits)")
        fig.suptitle(f"{title}\n{sub}", fontsize=12)
        if path is not None:
            fig.savefig(path, dpi=dpi, format="png")
    plt.close(fig)
    return fig


#: Line styles and markers cycled with the colours, so methods whose lines coincide (equal
#: static bid prices) stay distinguishable: no two methods share colour, style and marker.
LINE_STYLES = ("-", "--", "-.", ":")
MARKERS = ("o", "s", "^", "D", "v", "P", "X", "<", ">", "*")
EXACT_LABEL = "exact (optimal policy;\ndrawn where it goes)"


def _control(ds: xr.Dataset, q: int) -> str:
    return str(ds["control"].values[q]) if "control" in ds.coords else ""


def method_styles(ds: xr.Dataset) -> dict[str, dict[str, Any]]:
    """Colour, line style and marker of each method (the optimum in solid black)."""
    import matplotlib.pyplot as plt

    styles = {}
    for k, m in enumerate(ds.method.values.tolist()):
        if str(ds["kind"].values[k]) == "optimum":
            styles[m] = {"color": "black", "ls": "-", "marker": None}
        else:
            styles[m] = {"color": plt.get_cmap("tab10")(k % 10),
                         "ls": LINE_STYLES[k % len(LINE_STYLES)], "marker": MARKERS[k % 10]}
    return styles


def leg_label(ds: xr.Dataset, leg: str) -> str:
    """``name (id)`` when the leg has a name, else its id."""
    if "leg_name" in ds.coords:
        name = str(ds["leg_name"].sel(leg=leg).values)
        if name and name != leg:
            return f"{name} ({leg})"
    return leg


def _bid_price_panel(ax: Any, ds: xr.Dataset, leg: str, seats: int, styles: dict) -> None:
    periods = ds.period.values
    kinds = [str(k) for k in ds["kind"].values]
    if "optimum" not in kinds and "exact_bid_price_table" in ds:  # the yardstick, not a row
        exact = ds["exact_bid_price_table"].sel(leg=leg, capacity=seats).values
        if np.isfinite(exact).any():
            ax.plot(periods, exact, color="black", lw=2.4, label=EXACT_LABEL, zorder=5)
    step = max(periods.size // 8, 1)
    for q, name in enumerate(ds.method.values.tolist()):
        d = ds.isel(method=q)
        if str(d["status"].values) != "ran" or _control(ds, q) == "nested":
            continue
        table = d["bid_price_table"].sel(leg=leg, capacity=seats).values
        static = float(d["bid_price"].sel(leg=leg))
        kind = str(d["kind"].values)
        style = styles[name]
        # markers at staggered periods: a line lying under another still shows its marks
        marks = {"marker": style["marker"], "markevery": (q * step // 5 % step, step),
                 "ms": 5, "mfc": "white"}
        if kind == "optimum":
            if np.isfinite(table).any():
                ax.plot(periods, table, color="black", lw=2.4, zorder=5,
                        label=EXACT_LABEL.replace("exact", name, 1))
        elif np.isfinite(table).any():
            ax.plot(periods, table, color=style["color"], ls=style["ls"], lw=1.4, label=name,
                    **marks)
        elif math.isfinite(static):
            ax.plot(periods, np.full(periods.size, static), color=style["color"],
                    ls=style["ls"], lw=1.4, label=f"{name} (static)", **marks)
    ax.set_title(f"{seats} seat{'s' if seats != 1 else ''} left", fontsize=10)
    ax.set_xlabel("period (0 = opening)")
    ax.set_ylabel("bid price (currency per seat)")
    ax.set_xlim(periods[0], periods[-1])
    ax.set_ylim(bottom=0)


def _revenue_panel(ax: Any, ds: xr.Dataset, colours: dict) -> None:
    names = [n for q, n in enumerate(ds.method.values.tolist())
             if np.isfinite(float(ds["revenue_mean"].isel(method=q)))]
    names.sort(key=lambda n: float(ds["revenue_mean"].sel({"method": n})))
    y = np.arange(len(names))
    for k, name in enumerate(names):
        d = ds.sel({"method": name})
        mean = float(d["revenue_mean"])
        lo, hi = float(d["revenue_ci_low"]), float(d["revenue_ci_high"])
        err = [[mean - lo], [hi - mean]] if math.isfinite(lo) else None
        ax.errorbar(mean, k, xerr=err, fmt="o", color=colours[name], capsize=4, ms=6, lw=1.6)
        gap = float(d["gap_percent"])
        if str(d["kind"].values) == "optimum":
            note = f"{mean:,.0f}  (optimal policy; estimates the DP value)"
        else:
            note = f"{mean:,.0f}" + (f"  (gap {gap:+.1f}%, estimate)" if math.isfinite(gap)
                                     else "")
        ax.annotate(note, (hi if math.isfinite(hi) else mean, k), xytext=(6, 0),
                    textcoords="offset points", va="center", fontsize=8, zorder=6,
                    bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none",
                          "alpha": 0.85})
    ref = float(ds.attrs.get("reference_value", math.nan))
    if math.isfinite(ref):
        kind = ds.attrs.get("reference_kind", "")
        label = (f"optimum V(c) = {ref:,.0f}" if kind == "optimum"
                 else f"best upper bound ({ds.attrs.get('reference_method', '')}) = {ref:,.0f}")
        ax.axvline(ref, color="black", ls=":", lw=1.5, label=label)
        ax.legend(loc="lower right", fontsize=8, frameon=True)
    ax.set_yticks(y, names)
    ax.set_xlabel("expected revenue per departure (currency), mean with 95% confidence interval")
    ax.set_title("simulated revenue of each method's booking policy", fontsize=11)
    if names:
        lows = [float(ds["revenue_ci_low"].sel({"method": n})) for n in names]
        highs = [max(float(ds["revenue_ci_high"].sel({"method": n})), ref if math.isfinite(ref)
                     else -math.inf) for n in names]
        span = max(highs) - min(lows)
        ax.set_xlim(min(lows) - 0.05 * span, max(highs) + 0.22 * span)
    ax.set_ylim(-0.6, len(names) - 0.4)
