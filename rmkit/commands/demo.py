"""``rmkit demo``: the main job on the bundled example scenario."""

from __future__ import annotations

import argparse
from importlib import resources
from pathlib import Path

from rmkit.commands._common import CAUTION, add_json, emit_json, print_table

HELP = "run every available method on the bundled example and report the results"


def example_path() -> Path:
    """Path of the bundled example scenario (installed with the package)."""
    return Path(str(resources.files("rmkit") / "examples" / "tallowmere.toml"))


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--seed", type=int, default=None, help="random seed (default: scenario's)")
    add_json(parser)


def run(args: argparse.Namespace) -> int:
    from rmkit.commands.info import summary
    from rmkit.scenario import load_scenario
    from rmkit.solver import load_all

    scenario = load_scenario(example_path())
    seed = args.seed if args.seed is not None else scenario.default_seed
    rows = []
    for name, cls in sorted(load_all().items()):
        solver = cls()
        reason = solver.accepts(scenario.network, scenario.demand)
        if reason is not None:
            rows.append({"method": name, "skipped": reason})
            continue
        res = solver.solve(scenario.network, scenario.demand, seed=seed)
        kind = "optimum" if cls.tags.exact else "upper bound" if cls.tags.upper_bound else "heuristic"
        row = {"method": name, "kind": kind, "value": res.value, "seconds": res.seconds}
        if cls.tags.gives_bid_prices:
            row["bid_prices"] = dict(zip(scenario.network.leg_ids, res.bid_prices.tolist(),
                                         strict=True))
        rows.append(row)
    info = summary(scenario)
    if args.json:
        emit_json({"scenario": str(example_path()), "info": info, "methods": rows})
        return 0
    print(f"Example scenario: {example_path()}")
    legs = scenario.network.leg_ids
    print_table(
        f"{info['scenario']}: {info['legs']} legs, {info['products']} products, "
        f"{info['periods']} periods, alpha = {info['alpha']:.3f}",
        ["method", "kind", "value", "seconds", *legs],
        [
            [r["method"], r.get("kind", "skipped: " + r.get("skipped", "")), r.get("value"),
             r.get("seconds"), *[r.get("bid_prices", {}).get(leg) for leg in legs]]
            for r in rows
        ],
        note="Bid price columns: value of one seat on each leg at the start of the horizon.\n"
        + CAUTION,
    )
    return 0
