"""hypothesis invariants of the policy simulator on random small problems and random controls."""

from __future__ import annotations

import numpy as np
from hypothesis import given
from hypothesis import strategies as st

from rmkit import SolveResult
from rmkit.controls import get_control
from rmkit.workflows.policies import FixedPolicy, make_policy
from rmkit.workflows.simulate import replay, simulate
from tests.properties.test_dp_properties import small_networks  # the shared random problems
from tests.sim_reference import (
    bernstein_halfwidth,
    brute_force_decisions,
    kernel_both_ways,
    reference_replay,
)


@st.composite
def controlled_problems(draw):
    """A problem and a random control of a random type, as a fixed result from period 0."""
    net, dem = draw(small_networks())
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    control = draw(st.sampled_from(["fcfs", "bid_price", "table", "nested", "decisions"]))
    m, n, T = net.n_legs, net.n_products, dem.n_periods
    top = float(net.fares.max())
    if control == "fcfs":
        return net, dem, "fcfs", control
    if control == "bid_price":
        variables = {"bid_price": rng.uniform(0, top, size=m)}
    elif control == "table":
        table = rng.uniform(0, top, size=(T, net.max_capacity + 1, m))
        table[:, 0, :] = np.inf
        variables = {"bid_price_table": table}
    elif control == "nested":
        n_buckets = int(rng.integers(1, 4))
        variables = {
            "booking_limit": rng.integers(0, net.max_capacity + 2, size=(m, n_buckets)),
            "product_bucket": rng.integers(-1, n_buckets, size=(m, n)),
        }
    else:
        return net, dem, brute_force_decisions(net, dem)[1], control
    res = SolveResult(method="random", network=net, n_periods=T, variables=variables)
    return net, dem, FixedPolicy(res, control=control), control


@given(controlled_problems(), st.integers(1, 40), st.integers(0, 1000))
def test_bookkeeping_adds_up(case, paths, seed):
    net, dem, policy, _ = case
    ds = simulate(net, dem, policy, paths=paths, seed=seed)
    streams = dem.sample_arrivals(paths, seed).customer
    requests = np.stack([(streams == j).sum(axis=1) for j in range(net.n_products)], axis=1)
    np.testing.assert_array_equal(ds.accepted.values + ds.no_purchase.values, requests)
    sold = ds.accepted.values @ net.incidence.T
    np.testing.assert_array_equal(ds.seats_left.values, net.capacities - sold)
    assert np.all(ds.seats_left.values >= 0)
    np.testing.assert_allclose(ds.revenue.values, ds.accepted.values @ net.fares)
    lf = ds.load_factor.values[:, net.capacities > 0]
    assert np.all((lf >= 0) & (lf <= 1))


@given(controlled_problems(), st.integers(0, 1000))
def test_matches_the_plain_replay(case, seed):
    net, dem, policy, control = case
    arrivals = dem.sample_arrivals(15, seed)
    streams = arrivals.customer
    source = make_policy(policy)
    out = replay(net, dem, source, arrivals, seed=seed)
    ref = reference_replay(net, streams, control, lambda t, x: source.control_at(net, dem, t, x, 0),
                           {0})
    np.testing.assert_allclose(out.revenue, ref[0], rtol=0, atol=1e-9)
    np.testing.assert_array_equal(out.accepted, ref[1])
    np.testing.assert_array_equal(out.seats_left, ref[3])


@given(controlled_problems(), st.integers(1, 30), st.integers(0, 1000))
def test_a_path_does_not_depend_on_the_others(case, k, seed):
    net, dem, policy, _ = case
    long = simulate(net, dem, policy, paths=k + 7, seed=seed)
    short = simulate(net, dem, policy, paths=k, seed=seed)
    np.testing.assert_array_equal(short.revenue.values, long.revenue.values[:k])
    np.testing.assert_array_equal(short.accepted.values, long.accepted.values[:k])


@given(small_networks(), st.integers(0, 1000))
def test_open_controls_equal_fcfs_and_closed_ones_sell_nothing(problem, seed):
    net, dem = problem
    m, n, T = net.n_legs, net.n_products, dem.n_periods

    def run(**variables):
        res = SolveResult(method="hand", network=net, n_periods=T, variables=variables)
        return simulate(net, dem, res, paths=20, seed=seed).revenue.values

    fcfs = simulate(net, dem, "fcfs", paths=20, seed=seed).revenue.values
    np.testing.assert_array_equal(run(bid_price=np.zeros(m)), fcfs)
    open_limits = np.full((m, 1), float(net.max_capacity))
    np.testing.assert_array_equal(
        run(booking_limit=open_limits, product_bucket=np.where(net.incidence > 0, 0, -1)), fcfs)
    assert not run(bid_price=np.full(m, float(net.fares.max()) * 1.01)).any()
    assert not run(booking_limit=open_limits, product_bucket=np.full((m, n), -1)).any()


@given(small_networks(), st.integers(0, 1000))
def test_no_policy_beats_the_optimum(problem, seed):
    """V_0(c) >= the mean of any policy and = the mean of the optimal policy, within an
    empirical Bernstein interval (V by brute-force backward induction; Talluri & van Ryzin 2004,
    section 3.1)."""
    net, dem = problem
    _, exact = brute_force_decisions(net, dem)
    optimum = exact.value
    # per-path revenue lies in [0, most seats sellable x highest fare]
    value_range = min(dem.n_periods, int(net.capacities.sum())) * float(net.fares.max())
    rng = np.random.default_rng(seed)
    random_prices = SolveResult(method="hand", network=net, n_periods=dem.n_periods,
                                variables={"bid_price": rng.uniform(0, 100, size=net.n_legs)})
    for policy in ("fcfs", random_prices):
        r = simulate(net, dem, policy, paths=400, seed=seed).revenue.values
        assert r.mean() <= optimum + bernstein_halfwidth(r, value_range) + 1e-9
    r = simulate(net, dem, exact, paths=400, seed=seed).revenue.values
    assert abs(r.mean() - optimum) <= bernstein_halfwidth(r, value_range) + 1e-9


@given(controlled_problems(), st.integers(0, 1000), st.booleans())
def test_kernel_equals_its_interpreted_self(case, seed, stop_after_sale):
    net, dem, policy, control = case
    source = make_policy(policy)
    from rmkit.workflows.simulate import grid_strides, kernel_network

    kind = get_control(control)
    arrays = kind.arrays(source.control_at(net, dem, 0, net.capacities, 0), net, net.capacities)
    arrivals = dem.sample_arrivals(5, seed)
    p = arrivals.n_paths
    width = max(kind.memory_width(arrays), 1)

    def book():
        return [np.tile(net.capacities, (p, 1)).astype(np.int64), np.zeros(p),
                np.zeros((p, net.n_products), np.int64), np.zeros((p, net.n_products), np.int64),
                np.zeros((p, width), np.int64), np.zeros(p, np.int64)]

    books = kernel_both_ways(
        (arrays, dem.kernel_data(), arrivals.customer, arrivals.uniform,
         np.arange(p, dtype=np.int64), dem.n_periods, stop_after_sale, kernel_network(net)),
        book, lambda: np.zeros((p, dem.n_periods), np.int64),
        grid_strides(net.capacities))
    for a, b in zip(*books, strict=True):
        np.testing.assert_array_equal(a, b)
