"""``rmkit bidprices``: leg bid prices of a method at a booking state, and its booking limits."""

from __future__ import annotations

import argparse
import math

import numpy as np

from rmkit.cli._common import (
    add_json,
    add_scenario,
    add_state,
    check_outputs,
    emit_json,
    load,
    parse_state,
    write_netcdf,
)
from rmkit.cli._options import add_csv, add_param, add_quiet, one_method_settings
from rmkit.cli._report import CAUTION, Table

HELP = "bid prices of a method, and the nested booking limits of emsrb and davn (all arrays of " \
       "the result go to --out as NetCDF)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from rmkit.workflows.defaults import RULES

    add_scenario(parser)
    parser.add_argument("--method", required=True,
                        help="method name, e.g. dlp, dpd, lr, emsrb, davn (see 'rmkit methods')")
    parser.add_argument("--seed", type=int, default=None,
                        help=f"random seed of sampled methods (default: {RULES['seed']})")
    parser.add_argument("--out", default=None, help="write the whole result to FILE.nc")
    add_state(parser)
    add_param(parser, one_method=True)
    add_csv(parser)
    add_quiet(parser)
    add_json(parser)


def status_words(result, solver) -> str:
    """The status as a reader should take it: a heuristic's "optimal" only means it ran."""
    from rmkit.methods.base import kind_of

    if result.status == "optimal" and kind_of(solver) == "heuristic":
        return "solved (a heuristic: no optimality claim)"
    return result.status


def limit_rows(result, network) -> list[list]:
    """One row per leg and real bucket: products in it, its fare, protection and limit."""
    buckets = np.asarray(result["product_bucket"])
    fares = np.asarray(result["bucket_fare"])
    protect = np.asarray(result["protection_level"])
    limit = np.asarray(result["booking_limit"])
    rows = []
    for i, leg in enumerate(network.legs):
        for b in range(fares.shape[1]):
            if not math.isfinite(fares[i, b]):
                continue  # padding past the leg's last bucket
            members = [network.product_ids[j] for j in np.flatnonzero(buckets[i] == b)]
            rows.append([leg.id, b, " ".join(members), float(fares[i, b]),
                         int(protect[i, b]), int(limit[i, b])])
        closed = [network.product_ids[j] for j in np.flatnonzero(
            (buckets[i] < 0) & (np.asarray(network.incidence)[i] > 0))]
        if closed:
            rows.append([leg.id, None, " ".join(closed) + " (closed: net fare <= 0)", None,
                         None, 0])
    return rows


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
    from rmkit.errors import InputError
    from rmkit.files import NETCDF_SUFFIXES, check_output
    from rmkit.methods.base import get_solver, kind_of
    from rmkit.workflows.defaults import run_settings

    check_outputs(args, out=(".nc",))
    scenario = load(args.scenario)
    solver = get_solver(args.method, **one_method_settings(args.param, args.method))
    if not solver.tags.gives_bid_prices:
        raise InputError(
            f"--method: {args.method!r} is a bound without bid prices; use 'rmkit bound'"
        )
    if args.out is not None:
        check_output(args.out, "--out", NETCDF_SUFFIXES)
    check_table_target(args.csv)
    state = parse_state(scenario.network, scenario.demand, args.period, args.capacity)
    seed = run_settings(scenario, seed=args.seed).seed
    with warnings_summarised("bidprices") as caught, progress_bar("bidprices", args,
                                                                  bounded=False) as progress:
        if progress:
            progress(f"solving {args.method}", 0, 0)
        result = solver.solve(scenario.network, scenario.demand, state=state, seed=seed)
    prices = result.bid_prices
    net = scenario.network
    legs = net.leg_ids
    if args.out:
        from rmkit.workflows.warnings_log import as_attr

        ds = result.to_dataset()
        ds.attrs["warnings"] = as_attr([str(w.message).splitlines()[0] for w in caught])
        stamp(ds, scenario)
        write_netcdf(ds, args.out)
    nested = solver.tags.control == "nested" and "booking_limit" in result
    view = " (EMSR-b view of the nested limits)" if nested else ""
    found = [Table(
        "bid_prices", f"{scenario.name}: {result.method} bid prices at period {result.period} "
        f"({kind_of(solver)}; status: {status_words(result, solver)})",
        ["leg", "name", "seats left", "bid price" + view],
        [[leg.id, leg.name or "-", result.capacity[i], float(prices[i])]
         for i, leg in enumerate(net.legs)], [None, None, "d", ",.2f"])]
    if nested:
        found.append(Table(
            "booking_limits", "nested booking limits by leg and bucket (bucket 0 = highest)",
            ["leg", "bucket", "products", "bucket fare", "protection level",
             "booking limit"], limit_rows(result, net), [None, "d", None, ",.2f", "d", "d"]))
    written = [str(p) for p in write_tables(found, args.csv)]
    out = {
        "method": result.method,
        "kind": kind_of(solver),
        "bid_prices": {leg: float(prices[i]) for i, leg in enumerate(legs)},
        "value": result.value,
        "status": result.status,
        "seconds": result.seconds,
        "period": result.period,
        "capacity": dict(zip(legs, result.capacity, strict=True)),
        "out": args.out,
        "csv": written,
    }
    if nested:
        out["booking_limits"] = [dict(zip(found[1].columns, r, strict=True))
                                 for r in found[1].rows]
    if args.json:
        emit_json({**out, "provenance": provenance_json(scenario)})
        return 0
    notes = []
    if nested:
        notes.append("a request for a product in bucket b is accepted while the seats sold into "
                     "buckets b and lower stay within its booking limit; protection level = "
                     "seats kept for buckets 0..b")
    notes += [f"{label} written to {target}" for label, target in
              (("result", args.out), ("tables", ", ".join(written))) if target]
    notes.append(CAUTION)
    print_tables(found, notes)
    return 0
