"""``rmkit bidprices``: leg bid prices of a method at a booking state."""

from __future__ import annotations

import argparse

from rmkit.cli._common import (
    CAUTION,
    add_json,
    add_params,
    add_scenario,
    add_state,
    check_outputs,
    emit_json,
    load,
    parse_params,
    parse_state,
    print_table,
    write_netcdf,
)

HELP = "bid prices of a method (all arrays of the result go to --out as NetCDF)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_scenario(parser)
    parser.add_argument("--method", required=True, help="method name, e.g. dlp, dpd, lr, davn")
    parser.add_argument("--seed", type=int, default=None, help="random seed (sampled methods)")
    parser.add_argument("--out", default=None, help="write the whole result to FILE.nc")
    add_state(parser)
    add_params(parser)
    add_json(parser)


def run(args: argparse.Namespace) -> int:
    from rmkit.errors import InputError
    from rmkit.methods.base import get_solver

    check_outputs(args, out=(".nc",))
    scenario = load(args.scenario)
    solver = get_solver(args.method, **parse_params(args.param))
    if not solver.tags.gives_bid_prices:
        raise InputError(
            f"--method: {args.method!r} is a bound without bid prices; use 'rmkit bound'"
        )
    if args.out is not None and not str(args.out).lower().endswith(".nc"):
        raise InputError(f"--out: {args.out!r} should end in .nc")
    state = parse_state(scenario.network, scenario.demand, args.period, args.capacity)
    seed = args.seed if args.seed is not None else scenario.default_seed
    result = solver.solve(scenario.network, scenario.demand, state=state, seed=seed)
    prices = result.bid_prices
    legs = scenario.network.leg_ids
    if args.out:
        write_netcdf(result.to_dataset(), args.out)
    out = {
        "method": result.method,
        "bid_prices": {leg: float(prices[i]) for i, leg in enumerate(legs)},
        "value": result.value,
        "status": result.status,
        "seconds": result.seconds,
        "period": result.period,
        "capacity": dict(zip(legs, result.capacity, strict=True)),
        "out": args.out,
    }
    if args.json:
        emit_json(out)
        return 0
    print_table(
        f"{scenario.name}: {result.method} bid prices at period {result.period}",
        ["leg", "seats left", "bid price"],
        [[leg, result.capacity[i], float(prices[i])] for i, leg in enumerate(legs)],
        note=(f"written to {args.out}\n" if args.out else "") + CAUTION,
    )
    return 0
