"""``rmkit bound``: the optimum or an upper bound on the expected revenue of a scenario."""

from __future__ import annotations

import argparse

from rmkit.cli._common import (
    add_json,
    add_params,
    add_scenario,
    add_state,
    emit_json,
    load,
    parse_params,
    parse_state,
    print_table,
)

HELP = "value of a method from a state: the exact optimum or an upper bound"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_scenario(parser)
    parser.add_argument("--method", required=True, help="method name, e.g. exact, dlp, lr, ph")
    parser.add_argument("--samples", type=int, default=None, help="samples for sampled bounds")
    parser.add_argument("--seed", type=int, default=None, help="random seed (sampled methods)")
    add_state(parser)
    add_params(parser)
    add_json(parser)


def run(args: argparse.Namespace) -> int:
    from rmkit.errors import InputError
    from rmkit.methods.base import get_solver

    scenario = load(args.scenario)
    settings = parse_params(args.param)
    solver_probe = get_solver(args.method, **settings)
    if args.samples is not None:
        if "samples" not in solver_probe.params:
            raise InputError(f"--samples: method {args.method!r} does not sample")
        settings["samples"] = args.samples
    solver = get_solver(args.method, **settings)
    tags = solver.tags
    if not (tags.exact or tags.upper_bound):
        raise InputError(
            f"--method: {args.method!r} is a heuristic and gives no bound; use it with "
            "'rmkit bidprices' or 'rmkit simulate'"
        )
    state = parse_state(scenario.network, scenario.demand, args.period, args.capacity)
    seed = args.seed if args.seed is not None else scenario.default_seed
    result = solver.solve(scenario.network, scenario.demand, state=state, seed=seed)
    kind = "optimum" if tags.exact else "upper bound"
    out = {
        "method": result.method,
        "value": result.value,
        "stderr": result.stderr,
        "seconds": result.seconds,
        "status": result.status,
        "kind": kind,
        "period": result.period,
        "seed": result.seed,
    }
    if args.json:
        emit_json(out)
        return 0
    print_table(
        f"{scenario.name}: {kind} of expected revenue",
        ["method", "value", "std. error", "status", "seconds"],
        [[out["method"], out["value"], out["stderr"], out["status"], out["seconds"]]],
    )
    return 0
