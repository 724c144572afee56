"""``rmkit info``: the size and tightness of a scenario."""

from __future__ import annotations

import argparse

from rmkit.cli._common import add_json, add_scenario, emit_json, load, print_table

HELP = "legs, products, periods, demand factor and exact-DP state space of a scenario"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_scenario(parser)
    add_json(parser)


def summary(scenario) -> dict:
    from rmkit.model.demand import load_factor

    net, dem = scenario.network, scenario.demand
    leg_demand = net.incidence @ dem.demand_to_come(0)
    out = {
        "scenario": scenario.name,
        "legs": net.n_legs,
        "products": net.n_products,
        "periods": dem.n_periods,
        "alpha": load_factor(net, dem),
        "states": net.state_space_size,
        "expected_requests": float(dem.demand_to_come(0).sum()),
        # expected seat requests / capacity: how tight a leg is before any control. Not the
        # load factor, which simulate reports as seats sold / capacity.
        "demand_factor": {
            leg.id: (float(leg_demand[i] / leg.capacity) if leg.capacity else None)
            for i, leg in enumerate(net.legs)
        },
    }
    if dem.kind != "independent":  # customer types that choose (e.g. MNL segments)
        out["demand_kind"] = dem.kind
        out["segments"] = len(dem.customer_type_ids(net))
    return out


def run(args: argparse.Namespace) -> int:
    scenario = load(args.scenario)
    s = summary(scenario)
    if args.json:
        emit_json(s)
        return 0
    net = scenario.network
    leg_demand = net.incidence @ scenario.demand.demand_to_come(0)
    print_table(
        f"{s['scenario']}: {s['legs']} legs, {s['products']} products, {s['periods']} periods"
        + (f", {s['segments']} {s['demand_kind']}-demand segments" if "segments" in s else ""),
        ["leg", "capacity", "expected seat requests", "demand factor"],
        [
            [leg.id, leg.capacity, float(leg_demand[i]), s["demand_factor"][leg.id]]
            for i, leg in enumerate(net.legs)
        ],
        note=f"demand factor = expected seat requests / capacity (network: alpha = "
        f"{s['alpha']:.4f}); exact-DP states = {s['states']:,}",
    )
    return 0
