"""The policy variants of issue 14 part 4: lr-frequent (lr re-solved at least 50 times) and
dlp-threshold (the re-solved DLP primal rounded by a threshold, Bumpensanti & Wang 2020)."""

from __future__ import annotations

import json
import warnings

import numpy as np
import pytest

from rmkit.errors import InputError
from rmkit.methods.base import get_solver, load_all
from rmkit.methods.dlp_threshold import offered
from rmkit.workflows.simulate import simulate
from tests.instances import random_problem, small_problem


def _quiet(fn, *args, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return fn(*args, **kw)


def test_lr_frequent_re_solves_at_least_its_count_and_matches_lr_re_solved_as_often():
    net, dem = small_problem()
    freq = _quiet(simulate, net, dem, "lr-frequent", paths=40, seed=2, resolve=0,
                  params={"resolves": 6})
    plain = _quiet(simulate, net, dem, "lr", paths=40, seed=2, resolve=6)
    assert freq.attrs["resolves_done"] == 6
    assert json.loads(freq.attrs["resolve_periods"]) == json.loads(plain.attrs["resolve_periods"])
    np.testing.assert_array_equal(freq["revenue"].values, plain["revenue"].values)
    # asking for more re-solves than its floor gives more
    more = _quiet(simulate, net, dem, "lr-frequent", paths=10, seed=2, resolve=12,
                  params={"resolves": 6})
    assert more.attrs["resolves_done"] == 12


def test_lr_frequent_value_is_the_lr_bound_and_it_is_named_not_default():
    from rmkit.workflows.compare import select_methods

    net, dem = small_problem()
    a = _quiet(get_solver("lr-frequent").solve, net, dem)
    b = _quiet(get_solver("lr").solve, net, dem)
    assert a.value == pytest.approx(b.value, rel=1e-12)
    assert "lr-frequent" in load_all() and "lr-frequent" not in select_methods(None)
    assert "lr-frequent" in select_methods("lr-frequent")
    assert not get_solver("lr-frequent").tags.reference
    with pytest.raises(InputError, match="resolves"):
        get_solver("lr-frequent", resolves=0).check_params()


def test_compare_re_solves_lr_frequent_even_without_re_solves():
    from rmkit.workflows.compare import compare

    net, dem = small_problem()
    ds = _quiet(compare, net, dem, methods="lr,lr-frequent", paths=30, seed=1, resolve=0,
                with_exact=False, settings={"lr-frequent": {"resolves": 4}})
    lr = ds.isel(method=0)["revenue"].values
    freq = ds.isel(method=1)["revenue"].values
    again = _quiet(simulate, net, dem, "lr", paths=30, seed=1, resolve=4)
    np.testing.assert_array_equal(freq, again["revenue"].values)
    assert lr.shape == freq.shape


def test_threshold_rounding():
    y = np.array([0.0, 0.49, 0.5, 2.0, 0.0])
    mu = np.array([1.0, 1.0, 1.0, 2.0, 0.0])
    assert offered(y, mu, 0.5).tolist() == [False, False, True, True, True]
    assert offered(y, mu, 1.0).tolist() == [False, False, False, True, True]


def test_dlp_threshold_offers_what_the_lp_accepts_and_respects_capacity():
    net, dem = random_problem(5, n_legs=3, max_capacity=4, n_products=7, n_periods=25,
                              total_probability=0.9)
    res = get_solver("dlp-threshold").solve(net, dem)
    dlp = get_solver("dlp").solve(net, dem)
    assert res.value == pytest.approx(dlp.value)
    sets = np.asarray(res.payload["offer_sets"])
    assert sets.shape == (1, net.n_products)
    mu = dem.demand_to_come(0)
    np.testing.assert_array_equal(sets[0], offered(np.asarray(res["allocation"]), mu, 0.5))
    ds = simulate(net, dem, "dlp-threshold", paths=200, seed=3, resolve=5)
    sold = ds["accepted"].values @ net.incidence.T
    assert (sold <= np.asarray(net.capacities)[None, :]).all()
    # closed products never sell before the first re-solve: without re-solves, never
    static = simulate(net, dem, "dlp-threshold", paths=200, seed=3)
    closed = ~sets[0]
    assert (static["accepted"].values[:, closed] == 0).all()


def test_dlp_threshold_bad_threshold_gets_the_one_message():
    rule = r"'threshold' parameter of dlp-threshold must be a number in \(0, 1\]"
    with pytest.raises(InputError, match=rule):
        get_solver("dlp-threshold", threshold=1.5).check_params()


def test_lr_rollout_with_overwhelming_z_sells_exactly_like_lr():
    """The rollout keeps the lr table's decision unless its evidence is z standard errors against
    it: with z huge it never overturns one, so it sells exactly as lr does, path by path."""
    net, dem = small_problem()
    lr = _quiet(simulate, net, dem, "lr", paths=300, seed=4, resolve=3)
    same = _quiet(simulate, net, dem, "lr-rollout", paths=300, seed=4, resolve=3,
                  params={"z": 1e9, "samples": 8})
    np.testing.assert_array_equal(same["revenue"].values, lr["revenue"].values)


def test_lr_rollout_improves_on_lr_and_stays_under_the_optimum():
    """Policy improvement, sampled: on the small problem the rollout earns clearly more than
    its base policy (paired, common customers) and no more than the exact optimum allows."""
    from rmkit.workflows.stats import paired_differences

    net, dem = small_problem()
    lr = _quiet(simulate, net, dem, "lr", paths=1000, seed=1)
    roll = _quiet(simulate, net, dem, "lr-rollout", paths=1000, seed=1)
    d = paired_differences(roll["revenue"].values[None, :], lr["revenue"].values[None, :])
    assert d.ci_low[0, 0] > 0
    optimum = get_solver("exact").solve(net, dem).value
    assert float(roll["revenue_mean"]) <= optimum + 3 * float(roll["revenue_stderr"])


def test_lr_rollout_streams_are_its_own():
    net, dem = small_problem()
    res = _quiet(get_solver("lr-rollout", samples=5).solve, net, dem, seed=0)
    streams = res.payload["rollout_streams"]
    assert streams.shape == (5, dem.n_periods) and streams.dtype == np.int32
    assert not np.array_equal(streams, dem.sample_arrivals(5, 0).customer)
    assert res.value == pytest.approx(_quiet(get_solver("lr").solve, net, dem).value)
    with pytest.raises(InputError, match="'z' parameter of lr-rollout"):
        get_solver("lr-rollout", z=-1).check_params()
