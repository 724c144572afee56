"""``rmkit info``: the size and tightness of a scenario."""

from __future__ import annotations

import argparse

from rmkit.cli._common import add_json, add_scenario, emit_json, load, print_table

HELP = "legs, products, periods, load factor and exact-DP state space of a scenario"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_scenario(parser)
    add_json(parser)


def summary(scenario) -> dict:
    from rmkit.model.demand import load_factor

    net, dem = scenario.network, scenario.demand
    leg_demand = net.incidence @ dem.demand_to_come(0)
    return {
        "scenario": scenario.name,
        "legs": net.n_legs,
        "products": net.n_products,
        "periods": dem.n_periods,
        "alpha": load_factor(net, dem),
        "states": net.state_space_size,
        "expected_requests": float(dem.demand_to_come(0).sum()),
        "leg_load": {
            leg.id: (float(leg_demand[i] / leg.capacity) if leg.capacity else None)
            for i, leg in enumerate(net.legs)
        },
    }


def run(args: argparse.Namespace) -> int:
    scenario = load(args.scenario)
    s = summary(scenario)
    if args.json:
        emit_json(s)
        return 0
    net = scenario.network
    leg_demand = net.incidence @ scenario.demand.demand_to_come(0)
    print_table(
        f"{s['scenario']}: {s['legs']} legs, {s['products']} products, {s['periods']} periods",
        ["leg", "capacity", "expected seat requests", "load factor"],
        [
            [leg.id, leg.capacity, float(leg_demand[i]), s["leg_load"][leg.id]]
            for i, leg in enumerate(net.legs)
        ],
        note=f"network load factor alpha = {s['alpha']:.4f}; exact-DP states = {s['states']:,}",
    )
    return 0
