"""DAVN, EMSR-b nested limits and the fare bases: against hand computations, scipy and brute force."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from scipy.optimize import linprog

from rmkit import BookingState, DemandModel, InputError, Network, get_solver, load_all
from rmkit.methods.shared.fare_basis import (
    full_fares,
    leg_classes,
    moments_to_come,
    network_fares,
    prorated_fares,
)
from rmkit.methods.shared.leg_heuristics import emsr_b, group_fares

needs_dlp = pytest.mark.skipif("dlp" not in load_all(), reason="the dlp solver is not registered")


def two_legs(connecting_fare: float = 200.0) -> tuple[Network, DemandModel]:
    """Leg L1 (10 seats) and L2 (5); locals at 100 and 60, a connection L1+L2; 50 periods.

    Expected demand 20, 20 and 2: both locals exceed their leg, so in the DLP each local is taken
    partly (strictly between its bounds) and the leg duals are pinned to the local fares,
    100 and 60, whatever the connection's fare (by hand; checked against scipy below).
    """
    net = Network.build(
        legs=[("L1", 10), ("L2", 5)],
        products=[("A", 100.0, ["L1"]), ("B", 60.0, ["L2"]), ("AB", connecting_fare, ["L1", "L2"])],
    )
    return net, DemandModel(np.tile([0.4, 0.4, 0.04], (50, 1)))


def linprog_duals(net: Network, dem: DemandModel) -> np.ndarray:
    """Leg duals of the DLP from scipy's HiGHS interface, an independent reference."""
    res = linprog(
        -net.fares,
        A_ub=net.incidence,
        b_ub=net.capacities,
        bounds=list(zip(np.zeros(net.n_products), dem.demand_to_come(0), strict=True)),
        method="highs",
    )
    assert res.status == 0
    return -res.ineqlin.marginals


# ------------------------------------------------------------------ fare bases
@needs_dlp
def test_davn_net_fares_subtract_the_other_legs_dlp_duals():
    """Network contribution (Williamson 1992): fare less the other legs' DLP duals (scipy, by hand)."""
    net, dem = two_legs()
    np.testing.assert_allclose(linprog_duals(net, dem), [100.0, 60.0], atol=1e-9)
    res = get_solver("davn").solve(net, dem)
    expected = np.array([[100.0, np.nan, 200.0 - 60.0], [np.nan, 60.0, 200.0 - 100.0]])
    np.testing.assert_allclose(res["net_fare"], expected, atol=1e-9)
    np.testing.assert_allclose(res.payload["displacement_bid_price"], [100.0, 60.0], atol=1e-9)
    # the connection is the top bucket on both legs; each local is below it
    np.testing.assert_array_equal(res["product_bucket"], [[1, -1, 0], [-1, 1, 0]])
    np.testing.assert_allclose(res["bucket_fare"][:, :2], [[140.0, 100.0], [100.0, 60.0]])


@needs_dlp
def test_products_with_no_net_contribution_are_closed():
    """A connection worth less than its displaced locals gets no bucket on either leg."""
    net, dem = two_legs(connecting_fare=50.0)
    np.testing.assert_allclose(linprog_duals(net, dem), [100.0, 60.0], atol=1e-9)
    res = get_solver("davn").solve(net, dem)
    np.testing.assert_allclose(res["net_fare"][:, 2], [50.0 - 60.0, 50.0 - 100.0], atol=1e-9)
    np.testing.assert_array_equal(res["product_bucket"][:, 2], [-1, -1])
    for method in ("emsrb", "emsrb-heuristic"):
        other = get_solver(method, fare_basis="network").solve(net, dem)
        np.testing.assert_allclose(other["net_fare"], res["net_fare"])
    assert get_solver("emsrb", fare_basis="network").solve(net, dem)["product_bucket"][0, 2] == -1


def test_network_fares_take_any_bid_price_vector():
    """net[i, j] = f_j - sum of the bid prices of j's other legs (by hand); inf is capped."""
    net, _ = two_legs()
    g = network_fares(net, [30.0, 45.0])
    np.testing.assert_allclose(g, [[100.0, np.nan, 155.0], [np.nan, 60.0, 170.0]])
    capped = network_fares(net, [np.inf, 0.0])  # a sold-out L1 closes the connection on L2
    assert capped[1, 2] == 0.0 and capped[0, 2] == 200.0
    with pytest.raises(InputError, match=r"bid_prices\[1\]: bid price of leg 'L2' must be >= 0"):
        network_fares(net, [1.0, -2.0])
    with pytest.raises(InputError, match=r"bid_prices: needs one bid price per leg \(2\)"):
        network_fares(net, [1.0])


def test_prorated_rule_by_hand():
    """Shares in proportion to the legs' mean one-leg fares; equal split without a reference."""
    net = Network.build(
        legs=[("A", 5), ("B", 5), ("C", 5)],
        products=[
            ("a1", 100.0, ["A"]),
            ("a2", 50.0, ["A"]),
            ("b1", 300.0, ["B"]),
            ("ab", 500.0, ["A", "B"]),  # references 75 and 300: 100 and 400
            ("ac", 90.0, ["A", "C"]),  # C has no one-leg product: 45 and 45
        ],
    )
    g = prorated_fares(net)
    np.testing.assert_allclose(g[:, 3], [100.0, 400.0, np.nan])
    np.testing.assert_allclose(g[:, 4], [45.0, np.nan, 45.0])
    np.testing.assert_allclose(g[:, :3], full_fares(net)[:, :3])
    np.testing.assert_allclose(np.nansum(g, axis=0), net.fares)


# ------------------------------------------------------------------ buckets
def brute_force_grouping_cost(values: np.ndarray, weights: np.ndarray, n_groups: int) -> float:
    """Least weighted within-group squared deviation over every contiguous split (brute force)."""
    best = np.inf
    for cuts in itertools.combinations(range(1, values.size), n_groups - 1):
        edges = (0, *cuts, values.size)
        best = min(best, sum(within(values[a:b], weights[a:b]) for a, b in itertools.pairwise(edges)))
    return best


def within(v: np.ndarray, w: np.ndarray) -> float:
    mean = (w * v).sum() / w.sum()
    return float((w * (v - mean) ** 2).sum())


@pytest.mark.parametrize("seed", range(8))
def test_bucket_grouping_is_the_least_squares_optimum(seed):
    """Fisher (1958) grouping equals the best contiguous split found by brute force."""
    rng = np.random.default_rng(seed)
    values = np.sort(rng.uniform(10, 500, 8))[::-1]
    weights = rng.uniform(0.1, 5.0, 8)
    for g in (2, 3, 4):
        labels = group_fares(values, weights, g)
        assert labels.tolist() == sorted(labels.tolist()) and labels.max() == g - 1
        got = sum(within(values[labels == b], weights[labels == b]) for b in range(g))
        assert got == pytest.approx(brute_force_grouping_cost(values, weights, g), rel=1e-9, abs=1e-9)


def test_equal_fares_share_a_bucket():
    labels = group_fares(np.array([300.0, 200.0, 200.0, 90.0]), np.ones(4), None)
    assert labels.tolist() == [0, 1, 1, 2]
    classes = leg_classes(np.array([200.0, np.nan, 300.0, 200.0, -4.0]), np.array([1.0, 1, 2, 3, 1]))
    assert classes.bucket.tolist() == [1, -1, 0, 1, -1]
    np.testing.assert_allclose(classes.fares, [300.0, 200.0])
    np.testing.assert_allclose(classes.class_totals(np.array([1.0, 9, 2, 3, 9])), [2.0, 4.0])


def one_leg(capacity: int = 40) -> tuple[Network, DemandModel]:
    """One leg, four fares; demand spread evenly over 100 periods (means 8, 14, 20, 30)."""
    net = Network.build(
        legs=[("L", capacity)],
        products=[("f", 300.0, ["L"]), ("m", 200.0, ["L"]), ("s", 150.0, ["L"]), ("d", 90.0, ["L"])],
    )
    return net, DemandModel(np.tile(np.array([8.0, 14.0, 20.0, 30.0]) / 100, (100, 1)))


@needs_dlp
@pytest.mark.parametrize("law", ["poisson", "normal"])
def test_one_leg_davn_is_emsr_b(law):
    """On one leg net fares are fares: DAVN with enough buckets is EMSR-b (Belobaba 1992)."""
    net, dem = one_leg()
    res = get_solver("davn", buckets=4, law=law).solve(net, dem)
    mean, var = moments_to_come(dem.probabilities)
    sds = np.sqrt(var[0]) if law == "normal" else None
    y = emsr_b(net.fares, mean[0], sds, law)
    if law == "normal":
        y = np.maximum(np.ceil(y + 0.5) - 1, 0)  # the continuity-corrected integer levels
    np.testing.assert_array_equal(res["protection_level"][0], [*np.minimum(y, 40), 40])
    same = get_solver("emsrb", law=law).solve(net, dem)
    np.testing.assert_array_equal(same["protection_level"][0, :4], res["protection_level"][0])
    np.testing.assert_array_equal(same["product_bucket"], res["product_bucket"])


@needs_dlp
def test_davn_buckets_merge_fares_and_their_demand():
    """Two buckets on one leg: grouped fares, weighted bucket fares, EMSR-b on the merged demand."""
    net, dem = one_leg()
    res = get_solver("davn", buckets=2).solve(net, dem)
    mean = dem.demand_to_come(0)
    labels = group_fares(net.fares, mean, 2)
    np.testing.assert_array_equal(res["product_bucket"][0], labels)
    fares = [np.average(net.fares[labels == b], weights=mean[labels == b]) for b in (0, 1)]
    np.testing.assert_allclose(res["bucket_fare"][0], fares)
    merged = [mean[labels == b].sum() for b in (0, 1)]
    assert res["protection_level"][0, 0] == min(emsr_b(fares, merged, law="poisson")[0], 40)


# ------------------------------------------------------------------ the nested convention
@needs_dlp
@pytest.mark.parametrize("method", ["davn", "emsrb"])
def test_booking_limits_follow_the_convention_at_the_solve_state(method):
    """booking_limit[i, 0] = seats left, booking_limit[i, b] = seats left - protection[i, b-1]."""
    from tests.instances import small_problem

    net, dem = small_problem()
    state = BookingState(period=3, capacity=tuple(max(int(c) - 1, 0) for c in net.capacities))
    res = get_solver(method).solve(net, dem, state=state)
    x = np.array(state.capacity)
    limit, prot = res["booking_limit"], res["protection_level"]
    np.testing.assert_array_equal(limit[:, 0], x)
    np.testing.assert_array_equal(limit[:, 1:], x[:, None] - prot[:, :-1])
    assert np.all(limit >= 0) and np.all(limit <= x[:, None])
    assert np.all(np.diff(limit, axis=1) <= 0) and np.all(np.diff(prot, axis=1) >= 0)
    used = net.incidence.astype(bool)
    assert np.all(res["product_bucket"][~used] == -1)
    fares = res["bucket_fare"]
    for i in range(net.n_legs):
        k = int(np.isfinite(fares[i]).sum())
        assert np.all(np.diff(fares[i, :k]) < 0) and np.all(prot[i, max(k - 1, 0) :] == x[i])
        assert res["product_bucket"][i].max() == k - 1


@needs_dlp
def test_displacement_iterations_stop_at_a_fixed_point():
    """At a fixed point DAVN's own bid prices reproduce the displacement bid prices they came from."""
    from tests.instances import small_problem

    net, dem = small_problem()
    start = get_solver("davn").solve(net, dem)
    np.testing.assert_allclose(
        start.payload["displacement_bid_price"], get_solver("dlp").solve(net, dem).bid_prices
    )
    res = get_solver("davn", displacement_iterations=50).solve(net, dem)
    if not res.payload["displacement_converged"]:
        pytest.skip("no fixed point on this instance within 50 iterations")
    pi = res.payload["displacement_bid_price"]
    np.testing.assert_allclose(np.minimum(res.bid_prices, net.fares.max()), pi, rtol=1e-9)
    assert "fixed point" in res.message


# ------------------------------------------------------------------ bad settings
def test_bad_settings_are_refused_with_the_template():
    net, dem = one_leg()
    with pytest.raises(InputError, match=r"The 'buckets' parameter of davn must be an integer >= 1"):
        get_solver("davn", buckets=0).solve(net, dem)
    with pytest.raises(InputError, match=r"The 'fare_basis' parameter of emsrb must be one of"):
        get_solver("emsrb", fare_basis="half").solve(net, dem)
    with pytest.raises(InputError, match=r"The 'multiplier' parameter of emsrb-heuristic"):
        get_solver("emsrb-heuristic", multiplier=-1.0).solve(net, dem)
    with pytest.raises(InputError, match=r"'davn' itself needs displacement bid prices"):
        get_solver("davn", displacement_method="davn").solve(net, dem)
    with pytest.raises(InputError, match=r"unknown method 'nope'; valid methods:"):
        get_solver("emsrb", fare_basis="network", displacement_method="nope").solve(net, dem)


# ------------------------------------------------------------------ the leg-level value
@pytest.mark.parametrize("method", ["emsrb", "emsrb-heuristic"])
def test_value_is_each_legs_static_revenue_at_prorated_shares(method):
    """value = sum over legs of E[sales per class] x the class's prorated share (module docstring).

    Rebuilt leg by leg from the public static-model functions. The connection's fare 200 splits
    125 / 75 by the one-leg fares 100 and 60, so crediting a leg with another leg's share shows.
    """
    from rmkit.methods.shared.leg_heuristics import levels_from_seat_values
    from rmkit.methods.shared.nested_static import demand_pmf, nested_sales

    net, dem = two_legs()
    state = BookingState(period=10, capacity=(7, 4))
    res = get_solver(method).solve(net, dem, state=state)
    shares = prorated_fares(net)
    np.testing.assert_allclose(shares[:, 2], [125.0, 75.0])
    mean = dem.demand_to_come(10)
    want = 0.0
    for i, seats in enumerate(state.capacity):
        order = [j for j in np.argsort(-shares[i]) if np.isfinite(shares[i, j])]
        fares = shares[i, order]
        if method == "emsrb":
            levels = res["protection_level"][i, : len(order) - 1]
        else:
            levels = levels_from_seat_values(res["bid_price_table"][0, : seats + 1, i], fares)
        pmfs = demand_pmf(mean[order], None, "poisson", seats)
        want += float(fares @ nested_sales(pmfs, seats, levels))
    assert res.value == pytest.approx(want, rel=1e-12)
