"""The policy simulator: control logic, re-optimisation, statistics, published revenues, CLI.

External references: brute-force backward induction (tests/instances.py), scipy's HiGHS LP and
scipy.stats distributions, and the published simulated revenues of Topaloglu (2009), Table 2.
"""

from __future__ import annotations

import itertools
import json
import math
import os

import numpy as np
import pytest
import xarray as xr
from scipy.stats import binom, poisson

from rmkit import DemandModel, InputError, Network, SolverError, SolveResult, Tags, load_all, load_scenario
from rmkit.cli import main
from rmkit.controls import get_control, load_controls
from rmkit.methods.base import SolveOutput
from rmkit.model.demand import Arrivals
from rmkit.results import StatePolicy
from rmkit.workflows.policies import FixedPolicy, make_policy
from rmkit.workflows.policy_comparison import compare_policies
from rmkit.workflows.simulate import replay, resolve_periods, simulate, summarize
from tests.conftest import instance_path
from tests.instances import brute_force_values, random_problem, small_problem
from tests.published import POLICY_REVENUE
from tests.sim_reference import (
    LinprogBidPrices,
    LinprogNestedLimits,
    RecordingPolicy,
    brute_force_decisions,
    kernel_both_ways,
    linprog_dlp,
    one_leg_table,
    reference_replay,
)

REGISTRY = load_all()
LR_PROTOCOL_ENV = "RMKIT_SIM_LR_PROTOCOL"
# where the LR and DLP policies differ most in Topaloglu (2009), Table 2 (28381 vs 23573)
LR_DEFAULT_INSTANCE = "rm_200_4_1.6_8.0"


def _two_leg_network() -> Network:
    # AB (2 seats), BC (1 seat); products: AB 100, BC 80, AC 150 (both legs)
    return Network.build(
        legs=[("AB", 2), ("BC", 1)],
        products=[("AB-Y", 100.0, ["AB"]), ("BC-Y", 80.0, ["BC"]), ("AC-Y", 150.0, ["AB", "BC"])],
    )


def _fixed(net, n_periods, **variables) -> SolveResult:
    return SolveResult(method="by-hand", network=net, n_periods=n_periods, variables=variables)


def _replay_streams(net, streams, policy, **kw):
    streams = np.asarray(streams, dtype=np.int32)
    dem = DemandModel(np.full((streams.shape[1], net.n_products), 1.0 / (net.n_products + 1)))
    return replay(net, dem, make_policy(policy), Arrivals(streams, np.zeros((0, 0))), seed=0, **kw)


# ---------------------------------------------------------------- control logic by hand
HAND_STREAMS = [[2, 0, 1, 0, 2, -1], [0, 0, 0, 1, 1, 2]]


def test_fcfs_by_hand():
    # path 0: AC (150) takes AB+BC; AB (100); BC refused (BC full); AB refused; AC refused
    # path 1: AB, AB (AB full), AB refused, BC (80), BC refused, AC refused
    out = _replay_streams(_two_leg_network(), HAND_STREAMS, "fcfs")
    assert out.revenue.tolist() == [250.0, 280.0]
    assert out.accepted.tolist() == [[1, 0, 1], [2, 1, 0]]
    assert out.no_purchase.tolist() == [[1, 1, 1], [1, 1, 1]]
    assert out.seats_left.tolist() == [[0, 0], [0, 0]]


def test_static_bid_prices_by_hand():
    # bid prices AB 90, BC 70: AB (100 >= 90) yes, BC (80 >= 70) yes, AC (150 < 160) no
    net = _two_leg_network()
    out = _replay_streams(net, HAND_STREAMS, _fixed(net, 6, bid_price=np.array([90.0, 70.0])))
    assert out.revenue.tolist() == [280.0, 280.0]
    assert out.accepted.tolist() == [[2, 1, 0], [2, 1, 0]]
    assert out.no_purchase.tolist() == [[0, 0, 2], [1, 1, 1]]
    # a fare equal to the sum of its legs' bid prices is accepted (rule: fare >= sum)
    out = _replay_streams(net, HAND_STREAMS, _fixed(net, 6, bid_price=np.array([100.0, 50.0])))
    assert out.accepted.tolist() == [[1, 0, 1], [2, 1, 0]]


def test_table_bid_prices_by_hand():
    # AB's bid price is 120 for its last seat, 0 otherwise; BC's is 0 before period 3, then 90
    net = _two_leg_network()
    table = np.zeros((6, 3, 2))
    table[:, 0, :] = np.inf
    table[:, 1, 0] = 120.0
    table[3:, 1, 1] = 90.0
    table[:, 2, 1] = np.nan  # above BC's capacity: never looked at
    out = _replay_streams(net, HAND_STREAMS, _fixed(net, 6, bid_price_table=table))
    # path 0: AC at t0 (0 + 0) yes; AB at t1 (120 on its last seat) no; BC t2 full; AB t3 no;
    #         AC t4 no seats on BC -> 150
    # path 1: AB t0 yes (2 left: 0); AB t1 no (last seat 120); AB t2 no; BC t3 (90 > 80) no;
    #         BC t4 no; AC t5: 120 + 90 = 210 > 150 no -> 100
    assert out.revenue.tolist() == [150.0, 100.0]
    assert out.accepted.tolist() == [[0, 0, 1], [1, 0, 0]]
    assert out.seats_left.tolist() == [[1, 0], [1, 1]]


def test_nested_limits_by_hand():
    # AB: bucket 0 = AC (limit 2), bucket 1 = AB (limit 1); BC: bucket 0 = AC (1), BC closed
    net = _two_leg_network()
    limit = np.array([[2.0, 1.0], [1.0, 0.0]])
    bucket = np.array([[1, -1, 0], [-1, -1, 0]])
    out = _replay_streams(net, HAND_STREAMS, _fixed(net, 6, booking_limit=limit, product_bucket=bucket))
    # path 0: AC yes (AB bucket 0 count 1 <= 2, BC 1 <= 1); AB: sold into bucket 1.. = 0 + 1 <= 1
    #         yes; BC closed; AB: 1 + 1 > 1 no; AC: BC full -> 250
    # path 1: AB yes; AB no; AB no; BC closed x2; AC: AB bucket 0.. = 1 + 1 <= 2 and BC -> 250
    assert out.revenue.tolist() == [250.0, 250.0]
    assert out.accepted.tolist() == [[1, 0, 1], [1, 0, 1]]
    assert out.no_purchase.tolist() == [[1, 1, 1], [2, 2, 0]]


def test_exact_bits_span_bytes_by_hand():
    # 10 single-leg products on one leg: product 9's bit is bit 1 of byte 1
    net = Network.build([("L", 2)], [(f"P{j}", 10.0 + j, ["L"]) for j in range(10)])
    bits = np.zeros((3, 3, 2), dtype=np.uint8)
    bits[:, :, 1] = 0b10  # accept product 9 only, everywhere
    res = SolveResult(method="by-hand", network=net, n_periods=3, variables={},
                      policy=StatePolicy(bits, np.array([1])))
    out = _replay_streams(net, [[8, 9, 9], [9, 1, 9]], FixedPolicy(res, control="decisions"))
    assert out.revenue.tolist() == [38.0, 38.0]
    assert out.accepted[:, 9].tolist() == [2, 2]


# ---------------------------------------------------------------- kernels vs their py_func
@pytest.mark.parametrize("control", sorted(load_controls()))
@pytest.mark.parametrize("stop_after_sale", [False, True])
@pytest.mark.parametrize("loop", ["replay_paths", "replay_paths_parallel"])
def test_kernel_matches_its_py_func(control, stop_after_sale, loop):
    """Both loops (one thread, paths over threads) against their own py_func."""
    from rmkit.workflows.simulate import grid_strides, kernel_network

    net, dem = random_problem(11, n_legs=3, max_capacity=3, n_products=10, n_periods=8)
    kind = get_control(control)
    result = kind.example_result(net, dem, 11)
    arrays = kind.arrays(result, net, net.capacities)
    arrivals = dem.sample_arrivals(6, 11)
    p, n = arrivals.n_paths, net.n_products
    width = max(kind.memory_width(arrays), 1)

    def book():
        return [np.tile(net.capacities, (p, 1)).astype(np.int64), np.zeros(p),
                np.zeros((p, n), np.int64), np.zeros((p, n), np.int64),
                np.zeros((p, width), np.int64), np.full(p, 1, np.int64)]

    paths = np.array([0, 2, 3, 5], dtype=np.int64)
    outs = kernel_both_ways(
        (arrays, dem.kernel_data(), arrivals.customer, arrivals.uniform, paths, 7,
         stop_after_sale, kernel_network(net)), book, lambda: np.zeros((p, dem.n_periods), np.int64),
        grid_strides(net.capacities), loop)
    for a, b in zip(*outs, strict=True):
        np.testing.assert_array_equal(a, b)
    assert outs[0][5][[1, 4]].tolist() == [1, 1]  # paths not asked about are untouched


# ---------------------------------------------------------------- against a plain replay
def _reference_case(policy, control, resolve, every_sale=False, seed=5):
    net, dem = small_problem()
    arrivals = dem.sample_arrivals(60, seed)
    streams = arrivals.customer
    points = set(resolve_periods(dem.n_periods, resolve).tolist())
    solver = policy

    def control_at(t, x):
        from rmkit import BookingState

        return solver.solve(net, dem, state=BookingState(t, tuple(int(v) for v in x)))

    ref = reference_replay(net, streams, control, control_at, points, every_sale)
    recorder = RecordingPolicy(policy)
    out = replay(net, dem, make_policy(recorder), arrivals, seed=seed, resolve=resolve,
                 resolve_every_sale=every_sale)
    return ref, out, recorder


@pytest.mark.parametrize("resolve", [0, 3, 12])
@pytest.mark.parametrize(
    "policy, control",
    [(LinprogBidPrices(), "bid_price"), (LinprogNestedLimits(), "nested")],
    ids=["bid_price", "nested"],
)
def test_resolves_match_a_plain_replay(policy, control, resolve):
    ref, out, recorder = _reference_case(policy, control, resolve)
    np.testing.assert_allclose(out.revenue, ref[0], rtol=0, atol=1e-9)
    np.testing.assert_array_equal(out.accepted, ref[1])
    np.testing.assert_array_equal(out.no_purchase, ref[2])
    np.testing.assert_array_equal(out.seats_left, ref[3])
    # each distinct (period, seats left) is solved exactly once, at the scheduled periods only
    assert sorted(recorder.calls) == sorted(ref[4])
    assert len(recorder.calls) == len(set(recorder.calls)) == out.solves


@pytest.mark.parametrize(
    "policy, control",
    [(LinprogBidPrices(), "bid_price"), (LinprogNestedLimits(), "nested")],
    ids=["bid_price", "nested"],
)
def test_resolve_every_sale_matches_a_plain_replay(policy, control):
    ref, out, recorder = _reference_case(policy, control, resolve=2, every_sale=True)
    np.testing.assert_allclose(out.revenue, ref[0], rtol=0, atol=1e-9)
    np.testing.assert_array_equal(out.accepted, ref[1])
    assert sorted(recorder.calls) == sorted(ref[4])  # each distinct state solved once
    assert out.every_sale


def test_resolve_schedule():
    # the first period and every T/K periods after it (Topaloglu 2009: K = 5 on T = 200)
    assert resolve_periods(200, 5).tolist() == [0, 40, 80, 120, 160]
    assert resolve_periods(12, 0).tolist() == [0]
    assert resolve_periods(10, 3).tolist() == [0, 3, 6]


def test_every_sale_is_a_no_op_for_tables_exact_and_fcfs():
    net, dem = random_problem(3, n_legs=1, max_capacity=4, n_products=3, n_periods=10)

    class TablePolicy(LinprogBidPrices):  # the one-leg DP table, solved from period 0 only
        tags = Tags(exact=True, control="table")

        def _solve(self, problem, params, seed):
            return SolveOutput(dict(one_leg_table(net, dem).variables))

    _, exact = brute_force_decisions(net, dem)
    for policy in (TablePolicy(), "fcfs", FixedPolicy(exact)):
        a = simulate(net, dem, policy, paths=50, seed=2)
        b = simulate(net, dem, policy, paths=50, seed=2, resolve_every_sale=True)
        np.testing.assert_array_equal(a.revenue, b.revenue)
        assert b.attrs["resolve_every_sale"] == 0


def test_a_fixed_result_is_not_silently_re_solved():
    net, dem = small_problem()
    res = _fixed(net, dem.n_periods, bid_price=np.zeros(net.n_legs))
    with pytest.raises(InputError, match="cannot be re-solved"):
        simulate(net, dem, res, paths=5, seed=0, resolve=3)
    with pytest.raises(InputError, match="cannot be re-solved"):
        simulate(net, dem, res, paths=5, seed=0, resolve_every_sale=True)


# ---------------------------------------------------------------- against the optimum
def test_exact_policy_replays_the_dp_and_reaches_its_value():
    """Mean of the optimal policy = V_0(c) within 3 SE; path by path it equals a replay of the
    brute-force decisions (Talluri & van Ryzin 2004, section 3.1)."""
    net, dem = random_problem(21, n_legs=2, max_capacity=3, n_products=10, n_periods=12)
    values, exact = brute_force_decisions(net, dem)
    optimum = exact.value
    ds = simulate(net, dem, exact, paths=20000, seed=4)
    mean, se = float(ds.revenue_mean), float(ds.revenue_stderr)
    assert abs(mean - optimum) <= 3 * se, (mean, se, optimum)
    # path by path: straight from the value function, no bits involved
    streams = dem.sample_arrivals(300, 4).customer
    a, f = net.incidence, net.fares
    for k in range(300):
        x, revenue = tuple(int(c) for c in net.capacities), 0.0
        for t, j in enumerate(streams[k]):
            if j < 0:
                continue
            y = tuple(int(v) for v in np.subtract(x, a[:, j]))
            if min(y) >= 0 and f[j] >= values[t + 1][x] - values[t + 1][y]:
                x, revenue = y, revenue + f[j]
        assert ds.revenue.values[k] == pytest.approx(revenue, abs=1e-9)


def test_other_policies_stay_below_the_optimum():
    net, dem = small_problem()
    _, exact = brute_force_decisions(net, dem)
    optimum = exact.value
    for policy, resolve in [("fcfs", 0), (LinprogBidPrices(), 0), (LinprogBidPrices(), 4),
                            (LinprogNestedLimits(), 3)]:
        ds = simulate(net, dem, policy, paths=4000, seed=8, resolve=resolve)
        assert float(ds.revenue_mean) <= optimum + 3 * float(ds.revenue_stderr)
    # paired, the optimal policy beats each of them (difference >= -3 paired SE)
    cmp = compare_policies(net, dem, {"exact": exact, "dlp": LinprogBidPrices(), "fcfs": "fcfs"},
                           paths=4000, seed=8, resolve=4, bound=optimum)
    d = cmp.difference_mean.sel(versus="exact")
    assert np.all(d.values <= 3 * cmp.difference_stderr.sel(versus="exact").values)
    assert float(cmp.gap.sel(policy="exact")) == pytest.approx(
        optimum - float(cmp.revenue_mean.sel(policy="exact")))
    if "exact" in REGISTRY:  # the bound by method name: the registered DP's optimum
        by_name = compare_policies(net, dem, ["fcfs", "exact"], paths=2000, seed=9, bound="exact")
        assert float(by_name.bound) == pytest.approx(optimum, rel=1e-9)
        assert by_name.bound.attrs["source"] == "exact"
        gap = by_name.sel(policy="exact")
        assert float(gap.gap_ci_low) <= 0 <= float(gap.gap_ci_high)


def test_one_leg_table_of_the_dp_is_optimal():
    net, dem = random_problem(9, n_legs=1, max_capacity=5, n_products=4, n_periods=14)
    _, exact = brute_force_decisions(net, dem)
    table = simulate(net, dem, one_leg_table(net, dem), paths=3000, seed=1)
    bits = simulate(net, dem, exact, paths=3000, seed=1)
    np.testing.assert_allclose(table.revenue, bits.revenue, rtol=0, atol=1e-9)
    assert abs(float(table.revenue_mean) - exact.value) <= 3 * float(table.revenue_stderr)


# ---------------------------------------------------------------- closed forms for FCFS
def _one_leg_one_product(capacity: int, p: np.ndarray, fare: float = 100.0):
    net = Network.build([("L", capacity)], [("P", fare, ["L"])])
    return net, DemandModel(np.asarray(p, dtype=float)[:, None])


def test_fcfs_one_leg_binomial_closed_form():
    """Constant request chance p over T periods: D ~ Binomial(T, p) (scipy.stats), and FCFS
    revenue = fare x E[min(D, c)]; per path it is exactly fare x min(D_k, c)."""
    c, T, p = 7, 30, 0.3
    net, dem = _one_leg_one_product(c, np.full(T, p))
    ds = simulate(net, dem, "fcfs", paths=20000, seed=3)
    d = np.arange(T + 1)
    expected = 100.0 * float(np.sum(np.minimum(d, c) * binom.pmf(d, T, p)))
    assert abs(float(ds.revenue_mean) - expected) <= 3 * float(ds.revenue_stderr)
    counts = (dem.sample_streams(20000, 3) == 0).sum(axis=1)
    np.testing.assert_array_equal(ds.revenue.values, 100.0 * np.minimum(counts, c))


def test_fcfs_one_leg_sum_of_bernoullis_by_enumeration():
    """Period-varying chances: E[min(D, c)] by enumerating all 2^T request patterns."""
    p = np.array([0.1, 0.5, 0.25, 0.8, 0.05, 0.6, 0.3, 0.9, 0.45, 0.2])
    c = 4
    net, dem = _one_leg_one_product(c, p)
    expected = 0.0
    for pattern in itertools.product((0, 1), repeat=p.size):
        w = np.asarray(pattern)
        expected += float(np.prod(np.where(w, p, 1 - p))) * min(int(w.sum()), c)
    ds = simulate(net, dem, "fcfs", paths=20000, seed=6)
    assert abs(float(ds.revenue_mean) - 100.0 * expected) <= 3 * float(ds.revenue_stderr)


def test_fcfs_one_leg_poisson_closed_form():
    """Small per-period chances: D is close to Poisson(sum p) and FCFS revenue to
    fare x E[min(Poisson, c)] (scipy.stats). Barbour & Hall (1984): the total variation distance
    is at most min(1, 1/lambda) sum p_t^2, so the two expectations differ by at most c times
    that; the tolerance is 3 SE plus that bound."""
    c, T, q = 8, 2000, 0.004
    net, dem = _one_leg_one_product(c, np.full(T, q))
    lam = T * q
    k = np.arange(200)
    expected = 100.0 * float(np.sum(np.minimum(k, c) * poisson.pmf(k, lam)))
    approximation = 100.0 * c * min(1.0, 1.0 / lam) * T * q**2
    ds = simulate(net, dem, "fcfs", paths=20000, seed=7)
    assert abs(float(ds.revenue_mean) - expected) <= 3 * float(ds.revenue_stderr) + approximation
    assert approximation < 0.1 * float(ds.revenue_mean - 100.0 * c * poisson.sf(c - 1, lam))


# ---------------------------------------------------------------- statistics
def test_summary_statistics_by_hand():
    mean, se, lo, hi = summarize(np.array([1.0, 2.0, 3.0, 4.0]))
    # s = sqrt(5/3), se = s / 2, t_{0.975, 3} = 3.182446 (scipy.stats.t.ppf)
    assert mean == 2.5 and se == pytest.approx(math.sqrt(5 / 3) / 2)
    assert hi - mean == pytest.approx(3.182446305284263 * se)
    assert lo == pytest.approx(2 * mean - hi)


def test_paired_standard_error_is_smaller_than_unpaired():
    """On the public 4-spoke instance (Topaloglu 2009 data set) with common random numbers."""
    scenario = load_scenario(instance_path("rm_200_4_1.2_8.0"))
    cmp = compare_policies(scenario.network, scenario.demand,
                           {"dlp": LinprogBidPrices(), "fcfs": "fcfs"}, paths=200, seed=1)
    paired = float(cmp.difference_stderr.sel(policy="dlp", versus="fcfs"))
    unpaired = float(cmp.difference_stderr_unpaired.sel(policy="dlp", versus="fcfs"))
    assert 0 < paired < 0.8 * unpaired
    rev = cmp.revenue.values
    diff = rev[0] - rev[1]
    assert paired == pytest.approx(diff.std(ddof=1) / math.sqrt(200))
    assert unpaired == pytest.approx(math.sqrt(rev[0].var(ddof=1) / 200 + rev[1].var(ddof=1) / 200))
    assert float(cmp.difference_mean.sel(policy="dlp", versus="fcfs")) == pytest.approx(diff.mean())
    np.testing.assert_allclose(cmp.difference_mean.values, -cmp.difference_mean.values.T)


# ---------------------------------------------------------------- determinism and output
def _without_timing(ds: xr.Dataset) -> xr.Dataset:
    ds = ds.copy()
    for key in ("seconds", "solve_seconds"):
        ds.attrs.pop(key, None)
    return ds


def test_identical_seeds_identical_results_and_prefix_paths():
    net, dem = small_problem()
    a = simulate(net, dem, LinprogBidPrices(), paths=300, seed=12, resolve=3)
    b = simulate(net, dem, LinprogBidPrices(), paths=300, seed=12, resolve=3)
    xr.testing.assert_identical(_without_timing(a), _without_timing(b))
    short = simulate(net, dem, LinprogBidPrices(), paths=40, seed=12, resolve=3)
    np.testing.assert_array_equal(short.revenue, a.revenue[:40])
    other = simulate(net, dem, LinprogBidPrices(), paths=300, seed=13, resolve=3)
    assert not np.array_equal(other.revenue, a.revenue)


def test_dataset_layout_and_netcdf_round_trip(tmp_path):
    net, dem = small_problem()
    ds = simulate(net, dem, LinprogNestedLimits(), paths=50, seed=1, resolve=2)
    assert ds.revenue.dims == ("path",)
    assert ds.accepted.dims == ("path", "product") and ds.load_factor.dims == ("path", "leg")
    for key in ("policy", "seed", "paths", "resolves", "parameters", "rmkit_version", "solves"):
        assert key in ds.attrs
    sold = (net.incidence @ ds.accepted.values.T).T
    np.testing.assert_array_equal(ds.seats_left.values, net.capacities - sold)
    np.testing.assert_allclose(ds.revenue.values, ds.accepted.values @ net.fares)
    np.testing.assert_allclose(ds.load_factor.values, sold / net.capacities)
    path = tmp_path / "sim.nc"
    ds.to_netcdf(path, engine="h5netcdf")
    with xr.open_dataset(path, engine="h5netcdf") as back:
        xr.testing.assert_identical(back.load(), ds)


def test_compare_dataset_round_trips(tmp_path):
    net, dem = small_problem()
    cmp = compare_policies(net, dem, ["fcfs", LinprogBidPrices()], paths=30, seed=2, bound=1e4)
    assert list(cmp.policy.values) == ["fcfs", "linprog-dlp"]
    assert cmp.difference_mean.dims == ("policy", "versus")
    path = tmp_path / "cmp.nc"
    cmp.to_netcdf(path, engine="h5netcdf")
    with xr.open_dataset(path, engine="h5netcdf") as back:
        xr.testing.assert_identical(back.load(), cmp)


# ---------------------------------------------------------------- bad input
def test_bad_input_is_refused_with_the_field_named():
    net, dem = small_problem()
    with pytest.raises(InputError, match="'paths' parameter"):
        simulate(net, dem, "fcfs", paths=0, seed=0)
    with pytest.raises(InputError, match="'resolve' parameter"):
        simulate(net, dem, "fcfs", paths=5, seed=0, resolve=dem.n_periods + 1)
    with pytest.raises(InputError, match="unknown policy 'no-such-policy'; valid policies: fcfs"):
        simulate(net, dem, "no-such-policy", paths=5, seed=0)
    with pytest.raises(InputError, match="period 0"):
        res = SolveResult(method="x", network=net, n_periods=dem.n_periods, period=3,
                          variables={"bid_price": np.zeros(net.n_legs)})
        simulate(net, dem, res, paths=5, seed=0)
    with pytest.raises(InputError, match="two or more"):
        compare_policies(net, dem, ["fcfs"], paths=5, seed=0)
    with pytest.raises(InputError, match="bound"):
        compare_policies(net, dem, ["fcfs", LinprogBidPrices()], paths=5, seed=0, bound=[1, 2])
    with pytest.raises(InputError, match="unique"):
        compare_policies(net, dem, ["fcfs", "fcfs"], paths=5, seed=0)
    with pytest.raises(InputError, match="ProblemTooLarge|GiB"):
        simulate(net, dem, "fcfs", paths=10**6, seed=0, max_bytes=2**20)


def test_a_failed_solve_is_never_replayed_silently():
    net, dem = small_problem()
    nan_prices = _fixed(net, dem.n_periods, bid_price=np.full(net.n_legs, np.nan))
    with pytest.raises(SolverError, match="NaN"):
        simulate(net, dem, nan_prices, paths=5, seed=0)
    failed = SolveResult(method="x", network=net, n_periods=dem.n_periods, status="error",
                         variables={"bid_price": np.zeros(net.n_legs)}, message="boom")
    with pytest.raises(SolverError, match="status 'error'"):
        simulate(net, dem, failed, paths=5, seed=0)


# ---------------------------------------------------------------- CLI
def test_cli_json_and_netcdf(tmp_path, capsys):
    path = instance_path("rm_200_4_1.0_4.0")
    out = tmp_path / "fcfs.nc"
    code = main(["simulate", str(path), "--policy", "fcfs", "--paths", "40", "--seed", "3",
                 "--json", "--out", str(out)])
    assert code == 0
    got = json.loads(capsys.readouterr().out)
    for key in ("policy", "mean", "stderr", "paths", "resolves", "ci_low", "ci_high",
                "load_factor", "seconds"):
        assert key in got
    scenario = load_scenario(path)
    assert sorted(got["load_factor"]) == sorted(scenario.network.leg_ids)
    with xr.open_dataset(out, engine="h5netcdf") as ds:
        assert float(ds.revenue_mean) == pytest.approx(got["mean"])
        assert got["ci_low"] < got["mean"] < got["ci_high"]


def test_cli_bad_input_exits_2(capsys):
    path = instance_path("rm_200_4_1.0_4.0")
    assert main(["simulate", str(path), "--policy", "fcfs", "--paths", "0"]) == 2
    assert "paths" in capsys.readouterr().err
    assert main(["simulate", str(path), "--policy", "nope", "--paths", "3"]) == 2


# ---------------------------------------------------------------- registered methods
def _policies_with_controls():
    return sorted(n for n, cls in REGISTRY.items() if cls.tags.control)


@pytest.mark.parametrize("name", _policies_with_controls())
def test_every_registered_policy_stays_below_the_optimum(name):
    net, dem = small_problem()
    optimum = brute_force_values(net, dem)[0][tuple(int(c) for c in net.capacities)]
    solver = REGISTRY[name]()
    if solver.refusal_reason(net, dem) is not None:
        pytest.skip(solver.refusal_reason(net, dem))
    ds = simulate(net, dem, name, paths=2000, seed=5, resolve=2)
    mean, se = float(ds.revenue_mean), float(ds.revenue_stderr)
    assert mean <= optimum + 3 * se
    if REGISTRY[name].tags.exact:
        assert abs(mean - optimum) <= 3 * se


def _resolving_policies():
    return sorted(n for n, cls in REGISTRY.items() if cls.tags.control
                  and get_control(cls.tags.control).sale_sensitive and not cls.tags.stochastic
                  and "independent" in cls.demand_kinds)


@pytest.mark.parametrize("name", _resolving_policies())
def test_registered_policy_re_solved_after_every_sale_matches_a_plain_replay(name):
    """The real method, re-solved at 2 scheduled periods and after every sale, replayed by the
    simulator and by the plain reference replay (which calls the solver itself)."""
    from rmkit import BookingState, get_solver

    net, dem = small_problem()
    solver = get_solver(name)
    arrivals = dem.sample_arrivals(25, 4)

    def control_at(t, x):
        return solver.solve(net, dem, state=BookingState(t, tuple(int(v) for v in x)))

    ref = reference_replay(net, arrivals.customer, solver.tags.control, control_at, {0, 6}, True)
    out = replay(net, dem, make_policy(name), arrivals, seed=4, resolve=2, resolve_every_sale=True)
    np.testing.assert_allclose(out.revenue, ref[0], rtol=0, atol=1e-9)
    np.testing.assert_array_equal(out.accepted, ref[1])
    assert out.solves == len(ref[4])  # each distinct state solved once


def test_dlp_solver_matches_the_linprog_reference_policy():
    if "dlp" not in REGISTRY:
        pytest.skip("dlp is not registered yet")
    net, dem = small_problem()
    a = simulate(net, dem, "dlp", paths=500, seed=3, resolve=4)
    b = simulate(net, dem, LinprogBidPrices(), paths=500, seed=3, resolve=4)
    # degenerate LPs have several optimal duals; both solvers must at least give the same value
    value, _, _ = linprog_dlp(net, dem.demand_to_come(0), net.capacities)
    assert float(REGISTRY["dlp"]().solve(net, dem).value) == pytest.approx(value)
    assert abs(float(a.revenue_mean) - float(b.revenue_mean)) <= 3 * float(
        np.std(a.revenue.values - b.revenue.values, ddof=1) / math.sqrt(500)) + 1e-9


# ---------------------------------------------------------------- published revenues
def _published_tolerance(ds) -> float:
    """3 x the standard error of (our mean - the published mean): ours from our paths, theirs
    estimated as our per-path standard deviation over their 100 paths (Topaloglu 2009 simulated
    100 trajectories and published no standard error)."""
    n = int(ds.attrs["paths"])
    sd = float(ds.revenue_stderr) * math.sqrt(n)
    return 3.0 * math.sqrt(float(ds.revenue_stderr) ** 2 + sd**2 / 100)


@pytest.mark.parametrize("instance", sorted(POLICY_REVENUE))
@pytest.mark.parametrize("method", ["dlp", "lr"])
def test_published_policy_revenue(instance, method):
    """Topaloglu (2009), Table 2: DLP and LR bid-price policies, re-solved at 5 equally spaced
    periods, on the 4-spoke 200-period instances."""
    if method not in REGISTRY:
        pytest.skip(f"{method} is not registered yet")
    if method == "lr" and instance != LR_DEFAULT_INSTANCE and not os.environ.get(LR_PROTOCOL_ENV):
        pytest.skip(f"the LR protocol costs about 400 LR solves (~1.5 min) per instance; it runs "
                    f"on {LR_DEFAULT_INSTANCE} by default, set {LR_PROTOCOL_ENV}=1 for all six")
    scenario = load_scenario(instance_path(instance))
    paths = 100 if method == "lr" else 200  # LR: the published protocol's 100 paths (slow solves)
    ds = simulate(scenario.network, scenario.demand, method, paths=paths, seed=2009, resolve=5)
    published = POLICY_REVENUE[instance][method]
    assert abs(float(ds.revenue_mean) - published) <= _published_tolerance(ds), (
        float(ds.revenue_mean), float(ds.revenue_stderr), published)
