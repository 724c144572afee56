"""Simulating policies on choice demand: the purchase rule, common random numbers, the
independent-demand special case, bounds and the kernels against their py_func."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rmkit import Network, get_solver, load_all, simulate
from rmkit.controls import get_control, load_controls
from rmkit.model.choice import ChoiceDemand
from rmkit.workflows.simulate import grid_strides, kernel_network
from tests.choice_instances import parallel_flights, tiny_choice
from tests.instances import small_problem
from tests.sim_reference import kernel_both_ways

CHOICE_POLICIES = ("cdlp", "cdlp-sets", "cdpd", "exact", "dlp:independent",
                   "exact:independent", "emsrb:independent")


def test_purchase_shares_follow_the_mnl_probabilities():
    """One leg with seats to spare and first come, first served: each product's share of a
    segment's customers is v_j / (v_0 + sum v) (Talluri & van Ryzin 2004, sec. 7.1), within
    4 standard errors of a binomial proportion."""
    net = Network.build([("L", 10_000)], [("a", 1.0, ["L"]), ("b", 2.0, ["L"]),
                                          ("c", 3.0, ["L"])])
    dem = ChoiceDemand(np.full((50, 1), 0.9), [[0, 1, 2]], [[1.0, 2.0, 3.0]], [2.0], 3)
    ds = simulate(net, dem, "fcfs", paths=400, seed=2)
    arrived = int((dem.sample_arrivals(400, 2).customer >= 0).sum())
    sold = ds.accepted.values.sum(axis=0)
    for j, p in enumerate(np.array([1.0, 2.0, 3.0]) / 8.0):
        se = np.sqrt(p * (1 - p) / arrived)
        assert abs(sold[j] / arrived - p) <= 4 * se
    assert int(ds.no_purchase.values.sum()) + int(sold.sum()) == arrived


@pytest.mark.parametrize("method", ["exact", "fcfs", "dlp", "emsrb", "dpd"])
def test_one_segment_per_product_simulates_identically(method):
    """Independent demand and its choice form: same customers, same decisions, same revenues
    (the choice form runs independent-demand methods through the all-offered view, which is
    the identity there)."""
    net, ind = small_problem()
    ch = ChoiceDemand.independent_equivalent(ind.probabilities)
    name = method if method in ("exact", "fcfs") else f"{method}:independent"
    a = simulate(net, ind, method, paths=300, seed=8, resolve=3)
    b = simulate(net, ch, name, paths=300, seed=8, resolve=3)
    np.testing.assert_array_equal(a.revenue.values, b.revenue.values)
    np.testing.assert_array_equal(a.accepted.values, b.accepted.values)


def test_set_max_rule_is_the_table_rule_under_independent_demand():
    net, ind = small_problem()
    ch = ChoiceDemand.independent_equivalent(ind.probabilities)
    a = simulate(net, ind, "dpd", paths=300, seed=3)
    res = get_solver("dpd").solve(net, ind)
    import dataclasses

    from rmkit.methods.shared.offer_sets import offer_sets
    from rmkit.workflows.policies import FixedPolicy

    fixed = dataclasses.replace(res, payload={"offer_tables": offer_sets(ch)})
    b = simulate(net, ch, FixedPolicy(fixed, control="set_max"), paths=300, seed=3)
    np.testing.assert_array_equal(a.revenue.values, b.revenue.values)


def test_bounds_and_policies_on_a_small_network():
    """CDLP >= exact >= every policy's simulated mean - 3 SE; the exact policy's mean is its DP
    value within 3 SE (Liu & van Ryzin 2008, Prop. 2 for the bound)."""
    net, dem = tiny_choice(5, n_legs=2, max_capacity=3, n_products=5, n_periods=12)
    cdlp = get_solver("cdlp").solve(net, dem).value
    exact = get_solver("exact").solve(net, dem).value
    assert cdlp >= exact - 1e-9
    for name in CHOICE_POLICIES:
        ds = simulate(net, dem, name, paths=3000, seed=11, resolve=3)
        mean, se = float(ds.revenue_mean), float(ds.revenue_stderr)
        assert mean <= exact + 3 * se, name
        if name == "exact":
            assert abs(mean - exact) <= 3 * se


@pytest.mark.slow
def test_parallel_flights_policies_below_the_bounds():
    """Parallel flights (Liu & van Ryzin 2008) at alpha = 0.6: the same chain of inequalities,
    and the choice methods beat their independent-demand views (the cost of ignoring choice)."""
    net, dem = parallel_flights(0.6)
    cdlp = get_solver("cdlp").solve(net, dem).value
    exact = get_solver("exact").solve(net, dem).value
    assert cdlp >= exact
    means = {}
    for name in CHOICE_POLICIES:
        ds = simulate(net, dem, name, paths=2000, seed=4)
        means[name] = float(ds.revenue_mean)
        assert means[name] <= exact + 3 * float(ds.revenue_stderr), name
    assert means["cdpd"] > means["dlp:independent"]


@settings(max_examples=20, deadline=None)
@given(seed=st.integers(0, 10_000), control=st.sampled_from(sorted(load_controls())))
def test_never_sells_a_product_without_seats(seed, control):
    net, dem = tiny_choice(seed, n_legs=2, max_capacity=2, n_products=4, n_periods=10)
    kind = get_control(control)
    result = kind.example_result(net, dem, seed) if kind.needs_result else None
    from rmkit.workflows.policies import FixedPolicy, NoSolvePolicy

    policy = FixedPolicy(result, control=kind) if result is not None else NoSolvePolicy(kind)
    ds = simulate(net, dem, policy, paths=50, seed=seed)
    sold = ds.accepted.values @ net.incidence.T  # (paths, legs)
    assert np.all(sold <= net.capacities[None, :])
    assert np.all(ds.seats_left.values >= 0)


@pytest.mark.parametrize("control", sorted(load_controls()))
def test_choice_kernel_matches_its_py_func(control):
    net, dem = tiny_choice(3, n_legs=2, max_capacity=3, n_products=5, n_periods=8)
    kind = get_control(control)
    result = kind.example_result(net, dem, 3) if kind.needs_result else None
    arrays = kind.arrays(result, net, net.capacities) if result is not None else \
        kind.arrays(None, net, net.capacities)
    arrivals = dem.sample_arrivals(6, 3)
    p, n = arrivals.n_paths, net.n_products
    width = max(kind.memory_width(arrays), 1)

    def book():
        return [np.tile(net.capacities, (p, 1)).astype(np.int64), np.zeros(p),
                np.zeros((p, n), np.int64), np.zeros((p, dem.n_segments), np.int64),
                np.zeros((p, width), np.int64), np.zeros(p, np.int64)]

    outs = kernel_both_ways(
        (arrays, dem.kernel_data(), arrivals.customer, arrivals.uniform,
         np.arange(p, dtype=np.int64), 8, False, kernel_network(net)), book,
        lambda: np.zeros((p, dem.n_periods), np.int64), grid_strides(net.capacities))
    for a, b in zip(*outs, strict=True):
        np.testing.assert_array_equal(a, b)
    assert outs[0][2].sum() > 0 or control in ("decisions", "cdlp_sets", "nested")


def test_every_choice_method_is_registered_with_its_kind():
    reg = load_all()
    for name in ("cdlp", "cdlp-sets", "cdpd"):
        assert reg[name].demand_kinds == ("choice",)
    assert "choice" in reg["exact"].demand_kinds
