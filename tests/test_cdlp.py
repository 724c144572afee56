"""CDLP by column generation: published values, full enumeration, the DLP special case."""

from __future__ import annotations

import numpy as np
import pytest

from rmkit import InputError, get_solver
from rmkit.methods.shared.cdlp import greedy_set, mip_set, schedule, solve_cdlp
from rmkit.model.choice import ChoiceDemand, purchase_matrix
from tests.choice_instances import disjoint_choice, example_zero, parallel_flights, tiny_choice
from tests.instances import small_problem


@pytest.mark.parametrize("pricing", ["auto", "mip"])
def test_parallel_flights_published_value(pricing):
    """Koch (2017), Table 3 (second-hand through an independent reproduction), for the instance
    of Liu & van Ryzin (2008): CDLP at alpha = 0.6, first no-purchase case = 56,884.1."""
    net, dem = parallel_flights(0.6, case=0)
    res = get_solver("cdlp", pricing=pricing).solve(net, dem)
    assert res.value == pytest.approx(56_884.1, abs=0.05)


@pytest.mark.parametrize("pricing", ["auto", "mip"])
def test_example_zero_published_value_and_duals(pricing):
    """Bront, Mendez-Diaz & Vulcano (2009), p. 774 (second-hand): CDLP = 11,409.09, leg duals
    (0, 1134.55, 500), time dual 107.88 (objective and duals; the optimal sets are not unique)."""
    net, dem = example_zero()
    res = get_solver("cdlp", pricing=pricing).solve(net, dem)
    assert res.value == pytest.approx(11_409.09, abs=0.005)
    np.testing.assert_allclose(res["bid_price"], [0.0, 1134.55, 500.0], atol=0.005)
    assert res.payload["time_dual"][0] == pytest.approx(107.88, abs=0.005)


@pytest.mark.parametrize("pricing", ["auto", "mip", "enumerate"])
@pytest.mark.parametrize("seed", range(4))
def test_column_generation_equals_full_enumeration(seed, pricing):
    net, dem = tiny_choice(seed, n_legs=2, max_capacity=3, n_products=5, n_periods=6)
    x = net.capacities
    full = solve_cdlp(net, dem, 0, x, columns="all")
    gen = solve_cdlp(net, dem, 0, x, pricing=pricing)
    assert gen.status == full.status == "optimal"
    assert gen.value == pytest.approx(full.value, rel=1e-9, abs=1e-9)
    assert gen.n_columns < full.n_columns


def test_greedy_is_never_above_the_exact_pricing():
    net, dem = parallel_flights(0.6)
    exact = solve_cdlp(net, dem, 0, net.capacities)
    greedy = solve_cdlp(net, dem, 0, net.capacities, pricing="greedy")
    assert greedy.value <= exact.value + 1e-6
    assert "greedy" in greedy.message


@pytest.mark.parametrize("seed", range(5))
def test_pricing_mip_finds_the_best_set(seed):
    """The Bront et al. MIP against enumeration of every set, with random net revenues."""
    import itertools

    rng = np.random.default_rng(seed)
    _, dem = tiny_choice(seed, n_products=6)
    w, v0, lam = dem.weight_matrix(), dem.no_purchase, dem.arrival[0]
    r = rng.uniform(-50, 200, size=6)

    def gain(s):
        return float(lam @ purchase_matrix(w, v0, np.array(s)) @ r)

    best = max(gain(s) for s in itertools.product((False, True), repeat=6))
    assert gain(mip_set(w, v0, lam, r)) == pytest.approx(best, rel=1e-9, abs=1e-9)
    assert gain(greedy_set(w, v0, lam, r)[0]) <= best + 1e-9


def test_one_segment_per_product_cdlp_equals_dlp():
    """Standard result (Liu & van Ryzin 2008): under independent demand CDLP is the DLP."""
    net, ind = small_problem()
    ch = ChoiceDemand.independent_equivalent(ind.probabilities)
    assert get_solver("cdlp").solve(net, ch).value == pytest.approx(
        get_solver("dlp").solve(net, ind).value, rel=1e-9)


def test_schedule_covers_the_hours():
    net, dem = parallel_flights(0.6)
    sol = solve_cdlp(net, dem, 0, net.capacities)
    plan = schedule(sol)
    counts = np.bincount(plan, minlength=len(sol.sets) + 1)
    np.testing.assert_allclose(counts[: len(sol.sets)], sol.hours, atol=1.0)
    assert plan.size == dem.n_periods


def test_refuses_independent_demand_with_one_line():
    net, ind = small_problem()
    with pytest.raises(InputError, match="cdlp solves choice demand, not 'independent' demand"):
        get_solver("cdlp").solve(net, ind)


@pytest.mark.parametrize("seed", range(4))
def test_sblp_equals_cdlp_without_overlap(seed):
    """Gallego, Ratliff & Shebalov (2015), Theorem 1: with non-overlapping consideration sets
    SBLP and CDLP have the same optimum."""
    net, dem = disjoint_choice(seed)
    assert get_solver("sblp").solve(net, dem).value == pytest.approx(
        get_solver("cdlp").solve(net, dem).value, rel=1e-9)


def test_sblp_bounds_cdlp_with_overlap_and_is_dlp_for_independent_demand():
    for net, dem in (parallel_flights(0.6), example_zero()):
        assert get_solver("sblp").solve(net, dem).value >= get_solver("cdlp").solve(
            net, dem).value - 1e-6
    net, ind = small_problem()
    ch = ChoiceDemand.independent_equivalent(ind.probabilities)
    assert get_solver("sblp").solve(net, ch).value == pytest.approx(
        get_solver("dlp").solve(net, ind).value, rel=1e-9)
