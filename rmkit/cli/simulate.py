"""``rmkit simulate``: revenue, sales, spill and load of a booking policy over sampled requests."""

from __future__ import annotations

import argparse
import math
from typing import Any

import numpy as np

from rmkit.cli._common import add_json, add_scenario, emit_json, load, write_netcdf
from rmkit.cli._options import (
    add_csv,
    add_param,
    add_quiet,
    add_run_defaults,
    one_method_settings,
)
from rmkit.cli._report import CAUTION, Table

#: Library fields this command fills from options (see rmkit.cli.option_message).
OPTIONS = {"policy": "--policy", "bound": "--bound"}
HELP = "simulate a booking policy (fcfs or any method's control) on sampled request streams"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_scenario(parser)
    parser.add_argument("--policy", required=True,
                        help="fcfs, or a method name, e.g. exact, dlp, lr, emsrb, davn (see "
                        "'rmkit methods')")
    add_run_defaults(parser)
    parser.add_argument("--resolve-every-sale", action="store_true",
                        help="also recompute bid-price and nested-limit controls after every sale")
    parser.add_argument("--bound", default=None, metavar="METHOD",
                        help="also report the gap to this method's optimum or upper bound, e.g. "
                        "exact, dlp, lr")
    parser.add_argument("--out", default=None, help="write per-path results to FILE.nc")
    parser.add_argument("--plot", default=None,
                        help="draw the revenue distribution and load by leg to FILE.png")
    add_param(parser, one_method=True)
    add_csv(parser)
    add_quiet(parser)
    add_json(parser)


def _bound(name: str, scenario, seed: int) -> tuple[str, float, float]:
    from rmkit.errors import InputError
    from rmkit.methods.base import get_solver, kind_of

    solver = get_solver(name)
    if not (solver.tags.exact or solver.tags.upper_bound):
        raise InputError(f"bound: {name!r} is a heuristic, not an optimum or upper bound; use "
                         "exact, or a bound such as dlp or lr")
    result = solver.solve(scenario.network, scenario.demand, seed=seed)
    return kind_of(solver), result.value, result.stderr or 0.0


def summary(ds, bound: tuple[str, float, float] | None, bound_name: str | None
            ) -> dict[str, Any]:
    a = ds.attrs
    out: dict[str, Any] = {
        "policy": a["policy"], "control": a["control"],
        "mean": float(ds.revenue_mean), "stderr": float(ds.revenue_stderr),
        "ci_low": float(ds.revenue_ci_low), "ci_high": float(ds.revenue_ci_high),
        "paths": int(a["paths"]), "seed": int(a["seed"]),
        "resolves": int(a["resolves_done"]), "resolves_asked": int(a["resolves"]),
        "solves": int(a["solves"]), "seconds": float(a["seconds"]),
        "compile_seconds": float(a.get("compile_seconds", 0.0)),
        "assumes_independent_demand": a.get("assumes_independent_demand") or None,
    }
    if bound is not None:
        kind, value, se = bound
        gap = value - out["mean"]
        half = 1.96 * math.sqrt(out["stderr"] ** 2 + se**2)
        out["bound"] = {"method": bound_name, "kind": kind, "value": value, "stderr": se,
                        "gap": gap, "gap_ci_low": gap - half, "gap_ci_high": gap + half,
                        "gap_percent": 100.0 * gap / value if value else None}
    return out


def tables(ds, scenario, out: dict[str, Any]) -> list[Table]:
    """Summary, products, fare classes and legs: what the policy sold, refused and filled."""
    net = scenario.network
    fares = np.asarray(net.fares, dtype=float)
    sales = ds["accepted"].values.mean(axis=0)
    customers = [str(c) for c in ds.customer.values]
    refused = ds["no_purchase"].values.mean(axis=0)
    by_product = customers == list(net.product_ids)  # independent demand: a type per product
    spill = refused if by_product else np.full(net.n_products, np.nan)
    requests = sales + spill
    head = ["policy", "revenue", "revenue 95% low", "revenue 95% high", "std. error", "paths",
            "re-solves done", "re-solves asked", "solves", "seconds"]
    row = [out["policy"], out["mean"], out["ci_low"], out["ci_high"], out["stderr"],
           out["paths"], out["resolves"], out["resolves_asked"], out["solves"], out["seconds"]]
    if "bound" in out:
        b = out["bound"]
        head += [f"{b['kind']} ({b['method']})", "gap", "gap 95% low", "gap 95% high", "gap %"]
        row += [b["value"], b["gap"], b["gap_ci_low"], b["gap_ci_high"], b["gap_percent"]]
    formats = [None, ",.1f", ",.1f", ",.1f", ",.2f", ",d", "d", "d", ",d", ".2f",
               ",.1f", ",.1f", ",.1f", ",.1f", ".2f"]
    if out["assumes_independent_demand"]:
        from rmkit.methods.base import assumption_label

        head.append("demand assumption")
        row.append(assumption_label(out["assumes_independent_demand"]))
        formats = [*formats[:len(head) - 1], None]
    first = Table("summary", f"{scenario.name}: {out['policy']} ({out['control']} control), "
                  f"{out['paths']:,} paths, {out['resolves']} re-solves, seed {out['seed']}",
                  head, [row], formats)
    first.shown_columns = ["measure", "value"]  # one row reads better printed upright
    first.shown = [[h, first.cell(k, v)] for k, (h, v) in enumerate(zip(head, row, strict=True))]
    products = Table(
        "products", "by product (means per departure)",
        ["product", "fare class", "fare", "requests", "sales", "spill (refused)",
         "revenue", "sold %"],
        [[p.id, p.fare_class or "-", float(fares[j]), float(requests[j]), float(sales[j]),
          float(spill[j]), float(sales[j] * fares[j]),
          100.0 * sales[j] / requests[j] if requests[j] > 0 else None]
         for j, p in enumerate(net.products)],
        [None, None, ",.2f", ",.2f", ",.2f", ",.2f", ",.1f", ".1f"])
    classes: dict[str, list[float]] = {}
    for j, p in enumerate(net.products):
        acc = classes.setdefault(p.fare_class or "(none)", [0.0, 0.0, 0.0, 0.0])
        acc[0] += requests[j]
        acc[1] += sales[j]
        acc[2] += spill[j]
        acc[3] += sales[j] * fares[j]
    fare_classes = Table(
        "fare_classes", "by fare class",
        ["fare class", "requests", "sales", "spill (refused)", "revenue", "sold %"],
        [[c, v[0], v[1], v[2], v[3], 100.0 * v[1] / v[0] if v[0] > 0 else None]
         for c, v in classes.items()],
        [None, ",.2f", ",.2f", ",.2f", ",.1f", ".1f"])
    caps = np.asarray(net.capacities, dtype=float)
    sold = caps - ds["seats_left"].values.mean(axis=0)
    legs = Table(
        "legs", "by leg: load factor = seats sold / capacity",
        ["leg", "name", "capacity", "seats sold", "load factor"],
        [[leg.id, leg.name or "-", int(caps[i]), float(sold[i]),
          float(ds["load_factor_mean"].values[i])] for i, leg in enumerate(net.legs)],
        [None, None, "d", ",.2f", ".3f"])
    found = [first, products, fare_classes, legs]
    if not by_product:
        found.append(Table("customers", "customers who bought nothing, by type",
                           ["customer type", "no purchase"],
                           [[c, float(v)] for c, v in zip(customers, refused, strict=True)],
                           [None, ",.2f"]))
    return found


def notes(ds, out: dict[str, Any], written: dict[str, Any]) -> list[str]:
    lines = []
    if out["resolves_asked"] and not out["resolves"]:
        lines.append(f"{out['policy']}'s {out['control']} control never re-solves: the "
                     f"{out['resolves_asked']} re-solves asked for were not needed")
    if out["compile_seconds"] > 0.5:
        lines.append(f"kernel compilation (once per install) took {out['compile_seconds']:.1f} s, "
                     "kept out of the seconds")
    if "bound" in out:
        lines.append(f"gap = {out['bound']['kind']} - simulated revenue, an estimate with its 95% "
                     "interval")
    lines.append("spill = requests refused (the product was closed); sold % = sales / requests")
    lines += [f"{label} written to {target}" for label, target in written.items() if target]
    lines.append(CAUTION)
    return lines


def run(args: argparse.Namespace) -> int:
    from rmkit.cli._progress import progress_bar
    from rmkit.cli._report import (
        check_table_target,
        print_tables,
        provenance_json,
        stamp,
        warnings_summarised,
        write_tables,
    )
    from rmkit.files import NETCDF_SUFFIXES, check_output
    from rmkit.workflows.defaults import run_settings
    from rmkit.workflows.simulate import simulate

    if args.out is not None:  # output paths first: a bad one never wastes a simulation
        check_output(args.out, "--out", NETCDF_SUFFIXES)
    if args.plot is not None:
        check_output(args.plot, "--plot", (".png",))
    check_table_target(args.csv)
    scenario = load(args.scenario)
    run_ = run_settings(scenario, paths=args.paths, resolve=args.resolve, seed=args.seed)
    with warnings_summarised("simulate"):
        with progress_bar("simulate", args) as progress:
            ds = simulate(scenario.network, scenario.demand, args.policy, paths=run_.paths,
                          seed=run_.seed, resolve=run_.resolve,
                          resolve_every_sale=args.resolve_every_sale,
                          params=one_method_settings(args.param, args.policy), progress=progress)
        bound = _bound(args.bound, scenario, run_.seed) if args.bound else None
    ds = ds.assign_coords(leg_name=("leg", [leg.name or leg.id for leg in scenario.network.legs]))
    out = summary(ds, bound, args.bound)
    out["load_factor"] = {leg: float(v) for leg, v in
                          zip(scenario.network.leg_ids, ds.load_factor_mean.values, strict=True)}
    out["defaults_from"] = run_.header()
    if args.out:
        stamp(ds, scenario)
        write_netcdf(ds, args.out)
    if args.plot:
        from rmkit.files import write_atomically
        from rmkit.workflows.figures import simulation_figure

        write_atomically(args.plot, lambda tmp: simulation_figure(ds, tmp), "--plot")
    found = tables(ds, scenario, out)
    written = [str(p) for p in write_tables(found, args.csv)]
    if args.json:
        emit_json({**out, "out": args.out, "plot": args.plot, "csv": written,
                   "tables": {t.name: [dict(zip(t.columns, r, strict=True)) for r in t.rows]
                              for t in found[1:]},
                   "provenance": provenance_json(scenario)})
        return 0
    found[0].title = f"{scenario.name}: {out['policy']} ({out['control']} control), " + (
        run_.header().replace(f"{run_.resolve} re-solves", f"{out['resolves']} re-solves"))
    print_tables(found, notes(ds, out, {"NetCDF": args.out, "figure": args.plot,
                                        "tables": ", ".join(written)}))
    return 0
