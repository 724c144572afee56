"""The shared booking-control contract: every registered control, on every registered demand
kind, replays consistently in the simulator (books add up, capacity holds, same seed same
numbers, a path does not depend on the others, the compiled kernel equals its interpreted self,
the Dataset follows the schema and passes compare's independent path check)."""

from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

from rmkit import schema
from rmkit.controls import load_controls
from rmkit.model.demand import demand_kinds
from rmkit.workflows.policies import FixedPolicy, NoSolvePolicy
from rmkit.workflows.simulate import grid_strides, kernel_network, simulate
from rmkit.workflows.verification import check_paths
from tests.sim_reference import kernel_both_ways
from tests.test_contract import kind_problem

CONTROLS = load_controls()
CASES = [(c, k) for c in sorted(CONTROLS) for k in sorted(demand_kinds())]


def _policy(control: str, net, dem, seed: int = 5):
    kind = CONTROLS[control]
    if not kind.needs_result:
        return NoSolvePolicy(kind)
    return FixedPolicy(kind.example_result(net, dem, seed), control=kind)


@pytest.mark.parametrize(("control", "kind"), CASES, ids=[f"{c}-{k}" for c, k in CASES])
def test_control_replays_consistently(control, kind):
    net, dem = kind_problem(kind)
    policy = _policy(control, net, dem)
    ds = simulate(net, dem, policy, paths=60, seed=11)
    assert schema.check(ds) == []
    assert check_paths(net, ds) == "ok"
    sold = ds.accepted.values @ net.incidence.T
    assert np.all(sold <= net.capacities) and np.all(ds.seats_left.values >= 0)
    arrivals = dem.sample_arrivals(60, 11)
    came = np.stack([(arrivals.customer == c).sum(axis=1)
                     for c in range(dem.n_customer_types)], axis=1)
    assert np.all(ds.no_purchase.values <= came)  # nobody who did not come went without
    assert ds.accepted.values.sum() + ds.no_purchase.values.sum() <= came.sum()
    again = simulate(net, dem, _policy(control, net, dem), paths=60, seed=11)
    xr.testing.assert_identical(ds.drop_attrs(), again.drop_attrs())
    short = simulate(net, dem, _policy(control, net, dem), paths=17, seed=11)
    np.testing.assert_array_equal(short.revenue.values, ds.revenue.values[:17])


@pytest.mark.parametrize(("control", "kind"), CASES, ids=[f"{c}-{k}" for c, k in CASES])
@pytest.mark.parametrize("stop_after_sale", [False, True])
def test_kernel_function_equals_its_interpreted_self(control, kind, stop_after_sale):
    net, dem = kind_problem(kind)
    ctl = CONTROLS[control]
    result = ctl.example_result(net, dem, 3)
    arrays = ctl.arrays(result, net, net.capacities)
    arrivals = dem.sample_arrivals(7, 3)
    p = arrivals.n_paths
    width = max(ctl.memory_width(arrays), 1)

    def book():
        return [np.tile(net.capacities, (p, 1)).astype(np.int64), np.zeros(p),
                np.zeros((p, net.n_products), np.int64),
                np.zeros((p, dem.n_customer_types), np.int64),
                np.zeros((p, width), np.int64), np.zeros(p, np.int64)]

    compiled, plain = kernel_both_ways(
        (arrays, dem.kernel_data(), arrivals.customer, arrivals.uniform,
         np.arange(p, dtype=np.int64), dem.n_periods, stop_after_sale, kernel_network(net)),
        book, lambda: np.zeros((p, dem.n_periods), np.int64), grid_strides(net.capacities))
    for a, b in zip(compiled, plain, strict=True):
        np.testing.assert_array_equal(a, b)


@pytest.mark.parametrize("control", sorted(CONTROLS))
def test_control_declares_what_the_simulator_reads(control):
    ctl = CONTROLS[control]
    assert ctl.name == control and ctl.description
    assert callable(ctl.offers)
    if ctl.memory:
        net, dem = kind_problem("independent")
        arrays = ctl.arrays(ctl.example_result(net, dem, 1), net, net.capacities)
        assert ctl.memory_width(arrays) >= 1
    if ctl.scalable:  # prices scaled by 0 open every product that has seats: first come, first served
        net, dem = kind_problem("independent")
        res = ctl.example_result(net, dem, 1)
        free = simulate(net, dem, FixedPolicy(ctl.scaled(res, 0.0), control=ctl), paths=40, seed=2)
        fcfs = simulate(net, dem, "fcfs", paths=40, seed=2)
        np.testing.assert_array_equal(free.revenue.values, fcfs.revenue.values)
        assert not np.array_equal(simulate(net, dem, FixedPolicy(res, control=ctl), paths=40,
                                           seed=2).revenue.values, fcfs.revenue.values)
