"""``rmkit bound``: the optimum or an upper bound on the expected revenue of a scenario."""

from __future__ import annotations

import argparse

from rmkit.cli._common import (
    add_json,
    add_scenario,
    add_state,
    emit_json,
    load,
    parse_state,
)
from rmkit.cli._options import add_csv, add_param, add_quiet, one_method_settings
from rmkit.cli._report import Table

HELP = "value of a method from a state: the exact optimum or an upper bound"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from rmkit.workflows.defaults import RULES

    add_scenario(parser)
    parser.add_argument("--method", required=True,
                        help="method name, e.g. exact, dlp, lr, ph (see 'rmkit methods')")
    parser.add_argument("--samples", type=int, default=None,
                        help="samples of a sampled bound (rlp, ph; default: the method's)")
    parser.add_argument("--seed", type=int, default=None,
                        help=f"random seed of sampled methods (default: {RULES['seed']})")
    add_state(parser)
    add_param(parser, one_method=True)
    add_csv(parser)
    add_quiet(parser)
    add_json(parser)


def run(args: argparse.Namespace) -> int:
    from rmkit.cli._progress import progress_bar
    from rmkit.cli._report import (
        check_table_target,
        print_tables,
        provenance_json,
        warnings_summarised,
        write_tables,
    )
    from rmkit.errors import InputError
    from rmkit.methods.base import get_solver
    from rmkit.workflows.defaults import run_settings

    scenario = load(args.scenario)
    check_table_target(args.csv)
    settings = one_method_settings(args.param, args.method)
    solver_probe = get_solver(args.method, **settings)
    if args.samples is not None:
        if "samples" not in solver_probe.params:
            raise InputError(f"--samples: method {args.method!r} does not sample")
        settings["samples"] = args.samples
    solver = get_solver(args.method, **settings).for_value()  # nothing here replays a policy
    tags = solver.tags
    if not (tags.exact or tags.upper_bound):
        raise InputError(
            f"--method: {args.method!r} is a heuristic and gives no bound; use it with "
            "'rmkit bidprices' or 'rmkit simulate'"
        )
    state = parse_state(scenario.network, scenario.demand, args.period, args.capacity)
    seed = run_settings(scenario, seed=args.seed).seed
    with warnings_summarised("bound"), progress_bar("bound", args, bounded=False) as progress:
        if progress:
            progress(f"solving {args.method}", 0, 0)
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
    table = Table("bound", f"{scenario.name}: {kind} of expected revenue from period "
                  f"{result.period}", ["method", "kind", "value", "std. error", "status",
                                       "seconds", "seed"],
                  [[out["method"], kind, out["value"], out["stderr"], out["status"],
                    out["seconds"], out["seed"]]],
                  [None, None, ",.2f", ",.2f", None, ".2f", "d"])
    written = [str(p) for p in write_tables([table], args.csv)]
    if args.json:
        emit_json({**out, "parameters": result.parameters, "csv": written,
                   "provenance": provenance_json(scenario)})
        return 0
    notes = [f"{result.method}: {result.message}"] if result.message else []
    notes += [f"table written to {', '.join(written)}"] if written else []
    print_tables([table], notes)
    return 0
