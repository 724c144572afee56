"""Re-solves in batches and the simulator over threads give the numbers of their one-at-a-time
and one-thread versions, exactly."""

from __future__ import annotations

import numba
import numpy as np
import pytest

from rmkit import BookingState, get_solver
from rmkit.methods.base import ResolveSession
from rmkit.workflows.policies import make_policy
from rmkit.workflows.simulate import replay
from tests.instances import random_problem


def _problem():
    return random_problem(31, n_legs=3, max_capacity=6, n_products=8, n_periods=20)


def _states(network) -> list[BookingState]:
    full = tuple(int(c) for c in network.capacities)
    less = tuple(max(c - 1, 0) for c in full)
    # two states repeated and several sharing a period: the batch shares leg DPs between them
    return [BookingState(0, full), BookingState(5, full), BookingState(5, less),
            BookingState(5, (1,) + full[1:]), BookingState(5, less), BookingState(12, less),
            BookingState(12, (0,) + less[1:])]


def _assert_same(a, b) -> None:
    assert a.status == b.status
    assert a.value == b.value
    for name in ("bid_price", "bid_price_table"):
        if name in a:
            np.testing.assert_array_equal(np.asarray(a[name]), np.asarray(b[name]))


@pytest.mark.parametrize(("method", "settings"), [
    ("dpd", {}), ("dlp", {}), ("emsrb", {}),
    # one table per period (prorated fares), and one per distinct displaced fares (network)
    ("emsrb-heuristic", {}), ("emsrb-heuristic", {"fare_basis": "network"}),
    ("emsrb-heuristic", {"fare_basis": "network", "displacement_iterations": 1}),
])
def test_a_batch_of_re_solves_equals_one_solve_per_state(method, settings):
    net, dem = _problem()
    solver = get_solver(method, **settings)
    states = _states(net)
    batch = solver.resolve(net, dem, states, [None] * len(states), ResolveSession())
    for state, got in zip(states, batch, strict=True):
        _assert_same(got, solver.solve(net, dem, state=state))


def test_lr_re_solves_do_not_depend_on_how_they_are_batched():
    """lr's re-solves start from the run's period-0 split: a batch equals the same states
    re-solved one call at a time in one session."""
    net, dem = _problem()
    solver = get_solver("lr")
    states = _states(net)
    batch = solver.resolve(net, dem, states, [None] * len(states), ResolveSession())
    session = ResolveSession()
    for state, got in zip(states, batch, strict=True):
        _assert_same(got, solver.resolve(net, dem, [state], [None], session)[0])


@pytest.mark.skipif(numba.get_num_threads() < 2, reason="one numba thread on this machine")
@pytest.mark.parametrize(
    "policy, resolve", [("fcfs", 0), ("dlp", 0), ("dlp", 4), ("emsrb", 3), ("exact", 0),
                        ("dpd", 3)])
def test_two_threads_give_the_one_thread_numbers(policy, resolve):
    net, dem = _problem()
    arrivals = dem.sample_arrivals(300, 17)  # above the paths that wake the thread pool
    runs = [replay(net, dem, make_policy(policy), arrivals, seed=17, resolve=resolve,
                   threads=n) for n in (1, 2)]
    for name in ("revenue", "accepted", "no_purchase", "seats_left"):
        np.testing.assert_array_equal(getattr(runs[0], name), getattr(runs[1], name))
    assert runs[0].solves == runs[1].solves
