"""A new method and a new booking control, registered from this test module alone, work by name
in ``simulate`` and ``compare`` without any edit to library code.

The control is partitioned booking limits (Talluri & van Ryzin 2004, section 3.2: product j may
sell at most floor(y_j) units, y the DLP allocation); the method computes y with scipy's HiGHS
(tests/sim_reference.py), apart from rmkit's own LP code. Checks: with allocations at capacity the
policy is first come, first served; with zero allocations it sells nothing; each path sells no
product beyond its allocation; a plain-Python replay of the same rule gives the same revenues.
"""

from __future__ import annotations

import math
from typing import NamedTuple

import numpy as np
import pytest

import rmkit
from rmkit import SolveResult, Tags
from rmkit.controls import CONTROLS, register_control
from rmkit.controls.base import Control, owned
from rmkit.methods.base import REGISTRY, SolveOutput, Solver, register
from rmkit.workflows.compare import compare
from rmkit.workflows.policies import FixedPolicy
from tests.instances import small_problem
from tests.sim_reference import linprog_dlp


class QuotaArrays(NamedTuple):
    quota: np.ndarray  # float64 (products,): units each product may sell


def quota_offers(ctrl, k, t, j, seats, memo, net):
    return memo[k, j] + 1 <= ctrl.quota[j]


def quota_on_sale(ctrl, k, j, memo, net):
    memo[k, j] += 1


class PartitionedLimits(Control):
    name = "test-partitioned"
    description = "partitioned booking limits: product j sells at most floor(allocation_j)"
    arrays_type = QuotaArrays
    sale_sensitive = True
    memory = True
    offers = staticmethod(quota_offers)
    on_sale = staticmethod(quota_on_sale)

    @classmethod
    def drives(cls, result) -> bool:
        return "allocation" in result

    @classmethod
    def arrays(cls, result, network, capacity) -> QuotaArrays:
        cls.check_status(result)
        return QuotaArrays(np.floor(owned(result["allocation"], np.float64) + 1e-9))

    @classmethod
    def memory_width(cls, arrays: QuotaArrays) -> int:
        return int(arrays.quota.size)

    @classmethod
    def example_result(cls, network, demand, seed):
        return SolveResult("example", network, demand.n_periods,
                           {"allocation": np.full(network.n_products, 2.0)})


class LinprogPartitioned(Solver):
    """DLP allocations as partitioned limits (Talluri & van Ryzin 2004, section 3.2), by scipy."""

    name = "test-dlp-partitioned"
    tags = Tags(heuristic=True, gives_bid_prices=False, control="test-partitioned")
    citation = ("K. T. Talluri and G. J. van Ryzin (2004), The Theory and Practice of Revenue "
                "Management, Springer, sec. 3.2")

    def _solve(self, problem, params, seed):
        value, _, y = linprog_dlp(problem.network, problem.demand_to_come, problem.capacity)
        return SolveOutput({"value": np.float64(value), "allocation": y})


@pytest.fixture(scope="module")
def registered():
    register_control(PartitionedLimits)
    register(LinprogPartitioned)
    yield
    CONTROLS.pop(PartitionedLimits.name, None)
    REGISTRY.pop(LinprogPartitioned.name, None)


def _plain_replay(net, customers, quota):
    """The rule by hand: sell j if every leg has a seat and fewer than quota_j were sold."""
    revenue = np.zeros(customers.shape[0])
    for k, row in enumerate(customers):
        seats, sold = net.capacities.astype(int).copy(), np.zeros(net.n_products, int)
        for j in row:
            if j < 0:
                continue
            legs = np.flatnonzero(net.incidence[:, j])
            if np.all(seats[legs] >= 1) and sold[j] + 1 <= quota[j]:
                seats[legs] -= 1
                sold[j] += 1
                revenue[k] += net.fares[j]
    return revenue


def test_new_method_and_control_work_by_name(registered):
    net, dem = small_problem()
    ds = rmkit.simulate(net, dem, LinprogPartitioned.name, paths=200, seed=4)
    assert ds.attrs["control"] == PartitionedLimits.name
    _, _, y = linprog_dlp(net, dem.demand_to_come(0), net.capacities)
    quota = np.floor(y + 1e-9)
    assert np.all(ds.accepted.values <= quota)
    np.testing.assert_allclose(ds.revenue.values,
                               _plain_replay(net, dem.sample_arrivals(200, 4).customer, quota))
    # re-solved after every sale it still runs (the control says it is sale-sensitive)
    again = rmkit.simulate(net, dem, LinprogPartitioned.name, paths=50, seed=4, resolve=3,
                           resolve_every_sale=True)
    assert again.attrs["resolve_every_sale"] == 1 and again.attrs["solves"] > 3
    cmp = compare(net, dem, methods=[LinprogPartitioned.name, "dlp", "exact"], paths=200,
                  seed=4, visit_paths=50)
    row = cmp.sel({"method": LinprogPartitioned.name})
    assert str(row["status"].values) == "ran" and str(row["check"].values) == "ok"
    assert float(row["revenue_mean"]) == pytest.approx(float(ds["revenue_mean"]))
    assert math.isfinite(float(row["gap_percent"]))


def test_the_rule_reaches_its_extremes(registered):
    net, dem = small_problem()
    fcfs = rmkit.simulate(net, dem, "fcfs", paths=100, seed=1)
    big = SolveResult("hand", net, dem.n_periods,
                      {"allocation": np.full(net.n_products, float(net.capacities.sum()))})
    free = rmkit.simulate(net, dem, FixedPolicy(big), paths=100, seed=1)
    np.testing.assert_array_equal(free.revenue.values, fcfs.revenue.values)
    none = SolveResult("hand", net, dem.n_periods, {"allocation": np.zeros(net.n_products)})
    assert not rmkit.simulate(net, dem, FixedPolicy(none), paths=100, seed=1).revenue.any()
