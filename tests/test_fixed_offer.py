"""The branch-free loop for a fixed offer (:mod:`rmkit.kernels.fixed_offer`) against the general
replay loop of :mod:`rmkit.kernels.replay`: the same books, bit for bit, for every control that
declares a fixed offer, from random partial states on random networks (products of one to three
legs), on one thread and two, and compiled against its own ``py_func``."""

from __future__ import annotations

import numba
import numpy as np
import pytest

import rmkit.kernels.fixed_offer as fixed_kernels
from rmkit.controls import load_controls
from rmkit.controls.base import Control
from rmkit.kernels.replay import replay_paths, replay_paths_parallel
from rmkit.workflows.policies import FixedPolicy, NoSolvePolicy, make_policy
from rmkit.workflows.simulate import FixedOfferLoop, grid_strides, kernel_network, replay
from tests.instances import random_problem
from tests.sim_reference import interpreted_kernels

CONTROLS = load_controls()


def _arrays(ctl, net, dem, seed):
    result = ctl.example_result(net, dem, seed) if ctl.needs_result else None
    return result, ctl.arrays(result, net, net.capacities)


FIXED = sorted(name for name, ctl in CONTROLS.items()
               if ctl.fixed_offer.__func__ is not Control.fixed_offer.__func__)


def test_the_static_controls_declare_a_fixed_offer():
    assert FIXED == ["bid_price", "fcfs"]  # the others look at the period, the seats or memory


def _start(net, dem, rng, p):
    """A random partial book: paths part-way through the horizon with seats already sold."""
    seats = rng.integers(0, net.capacities + 1, size=(p, net.n_legs)).astype(np.int64)
    return [seats, rng.uniform(0, 500, p).round(2), rng.integers(0, 3, (p, net.n_products)),
            rng.integers(0, 3, (p, dem.n_customer_types)), np.zeros((p, 1), np.int64),
            rng.integers(0, dem.n_periods + 1, p).astype(np.int64)]


def _general(arrays, dem, arrivals, paths, stop, net, book, parallel):
    loop = replay_paths_parallel if parallel else replay_paths
    loop(arrays, dem.kernel_data(), arrivals.customer, arrivals.uniform, paths, stop, False,
         kernel_network(net), tuple(book), np.zeros((0, 0), np.int64),
         np.zeros(net.n_legs, np.int64))


def _fixed(offer, arrivals, paths, stop, net, book, loop):
    fo = FixedOfferLoop.start(net)
    open_ = np.zeros(net.n_products + 1, np.int64)
    open_[:-1] = offer
    seats, revenue, accepted, lost, _, nxt = book
    loop(arrivals.customer, paths, stop, open_, fo.fare, fo.legs, seats, revenue, accepted, lost,
         nxt)


@pytest.mark.parametrize("control", FIXED)
@pytest.mark.parametrize(("seed", "max_capacity"), [(s, 5) for s in range(6)] + [(6, 60), (7, 60)])
def test_fixed_offer_loop_equals_the_general_loop(control, seed, max_capacity):
    # capacity 60 over 40 periods: every request of a product that is open sells, so the
    # spare leg padding the one-leg products is drawn on at nearly every period
    rng = np.random.default_rng(seed)
    net, dem = random_problem(seed, n_legs=4, max_capacity=max_capacity, n_products=9,
                              n_periods=40, total_probability=0.9)
    assert net.incidence.sum(axis=0).max() >= 2  # connecting products are in the draw
    ctl = CONTROLS[control]
    _, arrays = _arrays(ctl, net, dem, seed)
    offer = ctl.fixed_offer(arrays, net)
    arrivals = dem.sample_arrivals(50, seed)
    paths = np.sort(rng.choice(50, size=37, replace=False)).astype(np.int64)
    stop = int(rng.integers(dem.n_periods // 2, dem.n_periods + 1))
    start = _start(net, dem, rng, 50)
    want = [a.copy() for a in start]
    _general(arrays, dem, arrivals, paths, stop, net, want, parallel=False)
    for loop, threads in ((fixed_kernels.replay_fixed_offer, 1),
                          (fixed_kernels.replay_fixed_offer_parallel, 1),
                          (fixed_kernels.replay_fixed_offer_parallel, 2)):
        got = [a.copy() for a in start]
        before = numba.get_num_threads()
        numba.set_num_threads(min(threads, before))
        try:
            _fixed(offer, arrivals, paths, stop, net, got, loop)
        finally:
            numba.set_num_threads(before)
        for a, b in zip(got, want, strict=True):
            np.testing.assert_array_equal(a, b)
    plain = [a.copy() for a in start]
    with interpreted_kernels():
        _fixed(offer, arrivals, paths, stop, net, plain, fixed_kernels.replay_fixed_offer)
    for a, b in zip(plain, want, strict=True):
        np.testing.assert_array_equal(a, b)


@pytest.mark.parametrize("control", FIXED)
def test_replay_takes_the_fixed_offer_loop_to_the_same_outcome(control, monkeypatch):
    net, dem = random_problem(3, n_legs=3, max_capacity=6, n_products=8, n_periods=60)
    ctl = CONTROLS[control]
    result, _ = _arrays(ctl, net, dem, 3)
    policy = FixedPolicy(result, control=ctl) if ctl.needs_result else NoSolvePolicy(ctl)
    arrivals = dem.sample_arrivals(400, 9)  # above PARALLEL_MIN_PATHS: the threaded loop
    calls = []
    real = FixedOfferLoop.replay
    monkeypatch.setattr(FixedOfferLoop, "replay", lambda self, *a: calls.append(1) or real(self, *a))
    fast = replay(net, dem, policy, arrivals, seed=9)
    assert calls
    monkeypatch.setattr(ctl, "fixed_offer", classmethod(lambda cls, arrays, network: None))
    general = replay(net, dem, policy, arrivals, seed=9)
    for name in ("revenue", "accepted", "no_purchase", "seats_left"):
        np.testing.assert_array_equal(getattr(fast, name), getattr(general, name))


def test_resolved_bid_prices_take_the_fixed_offer_loop_to_the_same_outcome(monkeypatch):
    from rmkit.controls.bid_price import BidPriceControl

    net, dem = random_problem(5, n_legs=3, max_capacity=6, n_products=8, n_periods=60)
    arrivals = dem.sample_arrivals(300, 4)
    fast = replay(net, dem, make_policy("dlp"), arrivals, seed=4, resolve=5)
    monkeypatch.setattr(BidPriceControl, "fixed_offer",
                        classmethod(lambda cls, arrays, network: None))
    general = replay(net, dem, make_policy("dlp"), arrivals, seed=4, resolve=5)
    assert fast.solves == general.solves > 1
    for name in ("revenue", "accepted", "no_purchase", "seats_left"):
        np.testing.assert_array_equal(getattr(fast, name), getattr(general, name))


def test_a_trace_or_every_sale_keeps_the_general_loop(monkeypatch):
    net, dem = random_problem(2, n_legs=2, max_capacity=4, n_products=5, n_periods=30)
    arrivals = dem.sample_arrivals(20, 1)
    monkeypatch.setattr(FixedOfferLoop, "replay", lambda *a: pytest.fail("fixed loop used"))
    traced = replay(net, dem, make_policy("dlp"), arrivals, seed=1, trace=True)
    assert traced.trace.shape == (20, 30)
    assert traced.trace[0, 0] == int(np.dot(net.capacities, grid_strides(net.capacities)))
    replay(net, dem, make_policy("dlp"), arrivals, seed=1, resolve=2, resolve_every_sale=True)


@pytest.mark.parametrize("seed", range(8))
def test_padded_legs_and_product_sums_equal_a_plain_loop(seed):
    # the vectorised forms against the loop they replace: legs in ascending order, bid prices
    # added one leg at a time from 0.0 (products of up to five legs: addition order matters)
    from rmkit.controls.bid_price import product_sums

    net, _ = random_problem(seed, n_legs=5, max_capacity=3, n_products=12)
    bid = np.random.default_rng(seed).uniform(0, 300, net.n_legs) * 1.1
    legs = FixedOfferLoop.start(net).legs
    for j in range(net.n_products):
        mine = [int(i) for i in np.flatnonzero(net.incidence[:, j])]
        assert legs[j].tolist() == mine + [net.n_legs] * (legs.shape[1] - len(mine))
        total = 0.0
        for i in mine:
            total += float(bid[i])
        assert product_sums(bid, net)[j] == total
    assert legs[-1].tolist() == [net.n_legs] * legs.shape[1]
