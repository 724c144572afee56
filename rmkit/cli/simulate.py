"""``rmkit simulate``: mean revenue of a booking policy over sampled request streams."""

from __future__ import annotations

import argparse

from rmkit.cli._common import (
    CAUTION,
    add_json,
    add_params,
    add_scenario,
    check_outputs,
    emit_json,
    fmt,
    load,
    parse_params,
    print_table,
    write_netcdf,
)

HELP = "simulate a booking policy (fcfs or any method's control) on sampled request streams"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_scenario(parser)
    parser.add_argument(
        "--policy", required=True, help="fcfs, or a method name, e.g. exact, dlp, lr, emsrb, davn"
    )
    parser.add_argument(
        "--resolve",
        type=int,
        default=None,
        metavar="K",
        help="recompute the policy at K equally spaced periods (default: the scenario's, or once)",
    )
    parser.add_argument(
        "--resolve-every-sale",
        action="store_true",
        help="also recompute bid-price and nested-limit controls after every sale",
    )
    parser.add_argument("--paths", type=int, default=None, help="sample paths (default 1000)")
    parser.add_argument("--seed", type=int, default=None, help="seed of the request streams")
    parser.add_argument("--out", default=None, help="write per-path results to FILE.nc")
    add_params(parser)
    add_json(parser)


def run(args: argparse.Namespace) -> int:
    from rmkit.errors import InputError
    from rmkit.workflows.simulate import simulate

    check_outputs(args, out=(".nc",))
    scenario = load(args.scenario)
    if args.out is not None and not str(args.out).lower().endswith(".nc"):
        raise InputError(f"--out: {args.out!r} should end in .nc")
    defaults = scenario.spec.defaults
    resolve = args.resolve if args.resolve is not None else (defaults.resolve or 0)
    paths = args.paths if args.paths is not None else scenario.default_paths
    seed = args.seed if args.seed is not None else scenario.default_seed
    ds = simulate(
        scenario.network,
        scenario.demand,
        args.policy,
        paths=paths,
        seed=seed,
        resolve=resolve,
        resolve_every_sale=args.resolve_every_sale,
        params=parse_params(args.param),
    )
    if args.out:
        write_netcdf(ds, args.out)
    legs = scenario.network.leg_ids
    load_factor = {leg: float(v) for leg, v in zip(legs, ds.load_factor_mean.values, strict=True)}
    out = {
        "policy": ds.attrs["policy"],
        "mean": float(ds.revenue_mean),
        "stderr": float(ds.revenue_stderr),
        "paths": int(ds.attrs["paths"]),
        "resolves": int(ds.attrs["resolves"]),
        "ci_low": float(ds.revenue_ci_low),
        "ci_high": float(ds.revenue_ci_high),
        "load_factor": load_factor,
        "seconds": float(ds.attrs["seconds"]),
        "solves": int(ds.attrs["solves"]),
        "seed": int(ds.attrs["seed"]),
    }
    if args.json:
        emit_json(out)
        return 0
    print_table(
        f"{scenario.name}: simulated revenue ({out['paths']} paths, seed {out['seed']})",
        ["policy", "mean", "std. error", "95% CI", "resolves"],
        [[out["policy"], out["mean"], out["stderr"],
          f"{fmt(out['ci_low'])} to {fmt(out['ci_high'])}", out["resolves"]]],
        note=f"{out['solves']} solves; {out['seconds']:.2f} s",
    )
    print_table(
        "final load factor (mean over paths)",
        ["leg", "load factor"],
        [[leg, v] for leg, v in load_factor.items()],
        note=CAUTION + (f" Per-path results written to {args.out}." if args.out else ""),
    )
    return 0
