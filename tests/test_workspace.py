"""Scratch arrays reused across solves (rmkit.methods.shared.workspace): reuse within a thread,
fresh arrays for a solve inside a solve, nothing a result keeps shared with the next solve, and
the numbers of lr unchanged by the reuse."""

from __future__ import annotations

import threading

import numpy as np

from rmkit.methods.lr import minimise_bound
from rmkit.methods.shared import workspace
from tests.instances import random_problem


def test_arrays_are_reused_within_a_thread_and_fresh_inside_a_borrow():
    with workspace.borrowed() as ws:
        a = ws.zeros("a", (3, 4))
        a[:] = 7.0
        with workspace.borrowed() as inner:  # a solve inside a solve
            b = inner.zeros("a", (3, 4))
            assert not np.shares_memory(a, b) and np.all(a == 7.0)
    with workspace.borrowed() as ws:
        again = ws.zeros("a", (2, 5))  # smaller: the same memory, zeroed
        assert np.shares_memory(again, a) and np.all(again == 0.0)
        assert again.flags.c_contiguous and again.shape == (2, 5)


def test_threads_keep_their_own_arrays():
    seen = {}

    def take(name):
        with workspace.borrowed() as ws:
            seen[name] = ws.empty("x", (100,))

    workers = [threading.Thread(target=take, args=(k,)) for k in ("t1", "t2")]
    for w in workers:
        w.start()
    for w in workers:
        w.join()
    assert not np.shares_memory(seen["t1"], seen["t2"])


def test_an_array_beyond_the_cap_is_not_kept(monkeypatch):
    monkeypatch.setattr(workspace, "MAX_KEPT_BYTES", 8 * 1000)
    with workspace.borrowed() as ws:
        big = ws.empty("big-for-cap-test", (2000,))
    with workspace.borrowed() as ws:
        assert not np.shares_memory(ws.empty("big-for-cap-test", (2000,)), big)


def _run(net, dem, keep=True):
    from rmkit.methods.lr import dual_split

    start = dual_split(net, np.zeros(net.n_legs), dem.n_periods)
    return minimise_bound(net, dem.probabilities, net.capacities, start, tol=1e-4,
                          max_iterations=40, step_factor=1.0, stall_tol=1e-7,
                          keep_multiplier=keep)


def test_lr_runs_give_the_same_numbers_and_keep_nothing_shared():
    net, dem = random_problem(4, n_legs=3, max_capacity=5, n_products=7, n_periods=30)
    first = _run(net, dem)
    kept = first.multiplier.copy()
    other_net, other_dem = random_problem(9, n_legs=3, max_capacity=5, n_products=7,
                                          n_periods=30)
    _run(other_net, other_dem)  # reuses the workspace with other numbers
    np.testing.assert_array_equal(first.multiplier, kept)  # the result owns its arrays
    again = _run(net, dem)
    assert again.bound == first.bound
    np.testing.assert_array_equal(again.multiplier, first.multiplier)
    np.testing.assert_array_equal(again.values, first.values)
    lean = _run(net, dem, keep=False)
    assert lean.multiplier is None and lean.bound == first.bound


def test_lr_numbers_do_not_depend_on_the_reuse(monkeypatch):
    from contextlib import contextmanager

    import rmkit.methods.lr as lr

    net, dem = random_problem(6, n_legs=4, max_capacity=4, n_products=9, n_periods=25)
    _run(*random_problem(2, n_legs=4, max_capacity=6, n_products=9, n_periods=40))  # dirty it
    reused = _run(net, dem)

    @contextmanager
    def fresh():
        yield workspace.Workspace(reuse=False)

    monkeypatch.setattr(lr, "borrowed", fresh)
    alone = _run(net, dem)
    assert alone.bound == reused.bound
    np.testing.assert_array_equal(alone.multiplier, reused.multiplier)
    np.testing.assert_array_equal(alone.bound_history, reused.bound_history)
