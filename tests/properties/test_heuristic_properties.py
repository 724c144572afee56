"""Invariants of the leg heuristics on random inputs (hypothesis)."""

from __future__ import annotations

import numpy as np
from hypothesis import given
from hypothesis import strategies as st

from rmkit import BookingState, get_solver
from rmkit.methods.shared.leg_heuristics import booking_limits, emsr_a, emsr_b, emsr_b_curve
from rmkit.methods.shared.nested_static import demand_pmf, optimal_protection_levels
from tests.instances import random_problem


@st.composite
def leg_classes(draw, max_classes: int = 6):
    """Strictly decreasing fares with demand means and standard deviations."""
    k = draw(st.integers(2, max_classes))
    steps = draw(st.lists(st.floats(0.5, 200.0), min_size=k, max_size=k))
    fares = np.cumsum(steps)[::-1] + 1.0
    means = np.array(draw(st.lists(st.floats(0.0, 60.0), min_size=k, max_size=k)))
    sds = np.array(draw(st.lists(st.floats(0.0, 25.0), min_size=k, max_size=k)))
    return fares, means, sds


@given(leg_classes(), st.sampled_from(["normal", "poisson"]))
def test_protection_levels_rise_with_the_number_of_higher_classes(classes, law):
    fares, means, sds = classes
    sd = sds if law == "normal" else None
    for levels in (emsr_a(fares, means, sd, law), emsr_b(fares, means, sd, law)):
        assert np.all(levels >= 0)
        assert np.all(np.diff(levels) >= -1e-9 * max(1.0, levels.max(initial=0.0)))


@given(leg_classes(max_classes=4), st.integers(0, 40))
def test_optimal_levels_rise_and_stay_within_capacity(classes, capacity):
    """Brumelle & McGill (1993): the optimal nested levels are non-decreasing."""
    fares, means, _ = classes
    levels = optimal_protection_levels(fares, demand_pmf(means, None, "poisson", capacity), capacity)
    assert np.all(np.diff(levels) >= 0)
    assert np.all((levels >= 0) & (levels <= capacity))


@given(leg_classes(), st.sampled_from(["normal", "poisson"]), st.integers(0, 150))
def test_booking_limits_within_zero_and_capacity(classes, law, capacity):
    fares, means, sds = classes
    levels = emsr_b(fares, means, sds if law == "normal" else None, law)
    limits = booking_limits(levels, capacity)
    assert limits[0] == capacity
    assert np.all((limits >= 0) & (limits <= capacity))
    assert np.all(np.diff(limits) <= 0)


@given(leg_classes(), st.sampled_from(["normal", "poisson"]), st.integers(1, 120))
def test_seat_values_do_not_increase_with_seats_left(classes, law, seats):
    fares, means, sds = classes
    levels, values = emsr_b_curve(fares, means, sds**2, law, seats)
    assert np.all(np.diff(values[1:]) <= 0)
    assert np.all(values[1:] >= 0) and np.all(values[1:] <= fares[0])
    assert np.all(np.diff(levels) >= 0) and np.all(levels <= seats)


@given(st.integers(0, 10_000), st.sampled_from(["prorated", "full"]), st.sampled_from(["normal", "poisson"]))
def test_heuristic_bid_prices_do_not_increase_with_seats_left(seed, basis, law):
    net, dem = random_problem(seed, n_legs=3, max_capacity=8, n_products=6, n_periods=10)
    res = get_solver("emsrb-heuristic", fare_basis=basis, law=law).solve(net, dem)
    table = res["bid_price_table"]
    for i, c in enumerate(net.capacities):
        seats = table[:, 1 : c + 1, i]
        assert np.all(np.diff(seats, axis=1) <= 0)


@given(st.integers(0, 10_000), st.sampled_from(["emsrb", "davn"]), st.integers(0, 5))
def test_solver_booking_limits_within_zero_and_seats_left(seed, method, period):
    net, dem = random_problem(seed, n_legs=3, max_capacity=8, n_products=6, n_periods=6)
    rng = np.random.default_rng(seed)
    x = tuple(int(rng.integers(0, c + 1)) for c in net.capacities)
    res = get_solver(method).solve(net, dem, state=BookingState(period=period, capacity=x))
    limits = res["booking_limit"]
    assert np.all(limits >= 0) and np.all(limits <= np.array(x)[:, None])
    assert np.all(np.diff(limits, axis=1) <= 0)


@given(leg_classes(), st.sampled_from(["normal", "poisson"]), st.integers(1, 80))
def test_bid_price_rule_accepts_what_the_nested_limits_accept(classes, law, seats):
    """Class c passes 'f_c >= v(x)' exactly when it passes the nested rule 'x > Y_{c-1}'."""
    fares, means, sds = classes
    levels, values = emsr_b_curve(fares, means, sds**2, law, seats)
    x = np.arange(1, seats + 1)
    by_price = fares[None, :] >= values[1:, None]
    by_limit = x[:, None] > np.concatenate([[0], levels])[None, :]
    np.testing.assert_array_equal(by_price, by_limit)


def test_subnormal_means_and_zero_spread_give_finite_levels():
    """Found by hypothesis: a subnormal mean rounds the merged fare below the next fare,
    and sd = 0 turned ``0 x ndtri(<0)`` into NaN. Deterministic demand protects its mean."""
    fares, sds = np.array([100.3, 100.1]), np.array([0.0, 0.0])
    for means in (np.array([5e-324, 1.0]), np.array([4.0, 1.0])):
        for levels in (emsr_a(fares, means, sds, "normal"), emsr_b(fares, means, sds, "normal")):
            assert np.all(np.isfinite(levels))
            assert levels[0] == means[0]
    assert emsr_b(fares, np.array([5e-324, 1.0]), np.array([1.0, 1.0]), "normal")[0] == 0.0
