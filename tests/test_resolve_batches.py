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
    ("dpd", {}), ("dlp", {}), ("emsrb", {}), ("rlp", {}),
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


def _sharing_methods() -> list[str]:
    """Registered independent-demand methods whose re-solve rounds differ from a loop of solves:
    they override ``_resolve`` or run their states side by side."""
    from rmkit.methods.base import Solver, load_all

    return sorted(name for name, cls in load_all().items()
                  if "independent" in cls.demand_kinds
                  and (cls._resolve is not Solver._resolve or cls.solves_side_by_side))


@pytest.mark.parametrize("method", _sharing_methods())
def test_a_round_equals_its_states_re_solved_one_call_at_a_time(method):
    """Whatever a method shares within a round (leg DPs, tables, threads), a round gives the
    numbers of the same states re-solved one call at a time in one session."""
    net, dem = _problem()
    states = _states(net)
    seeds = list(range(len(states)))
    batch = get_solver(method).resolve(net, dem, states, seeds, ResolveSession())
    solver, session = get_solver(method), ResolveSession()
    for state, seed, got in zip(states, seeds, batch, strict=True):
        _assert_same(got, solver.resolve(net, dem, [state], [seed], session)[0])


def test_the_sharing_methods_are_found():
    assert {"dpd", "emsrb-heuristic", "lr", "rlp"} <= set(_sharing_methods())


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


def test_the_serial_leg_kernels_equal_the_batch_kernels_and_their_py_func():
    """lr's loop runs the leg kernels leg after leg without the GIL, reading each leg's own
    products only (``*_each``), so that its re-solves can share the cores; they must give the
    batch kernels' numbers, and their own interpreted code's."""
    from rmkit.kernels.decomposition import leg_acceptance_batch, leg_acceptance_each
    from rmkit.kernels.single_leg import leg_values_batch, leg_values_each

    rng = np.random.default_rng(7)
    n_legs, n_periods, n = 3, 15, 5
    prob = rng.uniform(0, 0.15, (n_periods, n))
    fares = rng.uniform(-5, 60, (n_legs, n_periods, n))  # some never accepted (<= 0)
    caps = np.array([4, 6, 2])
    start = np.array([3, 6, 1])
    # leg i's products; the others get fare 0 on it (never accepted), as in lr's splits
    on_leg = np.array([[0, 1, 3, -1], [1, 2, 3, 4], [0, 4, -1, -1]])
    for i, row in enumerate(on_leg):
        fares[i][:, np.setdiff1d(np.arange(n), row)] = 0.0
    outs = []
    for values_fn, accept_fn in ((leg_values_batch, leg_acceptance_batch),
                                 (leg_values_each, leg_acceptance_each),
                                 (leg_values_each.py_func, leg_acceptance_each.py_func)):
        values = np.empty((n_legs, n_periods + 1, 7))
        occupancy = np.empty_like(values)
        accept = np.zeros((n_legs, n_periods, n))
        if values_fn is leg_values_batch:
            values_fn(prob, fares, caps, values)
            accept_fn(prob, fares, caps, start, values, occupancy, accept)
        else:
            values_fn(prob, fares, caps, on_leg, values)
            accept_fn(prob, fares, caps, start, on_leg, values, occupancy, accept)
        outs.append((values, occupancy, accept))
    for other in outs[1:]:
        for a, b in zip(outs[0], other, strict=True):
            np.testing.assert_array_equal(a, b)


@pytest.mark.skipif(numba.get_num_threads() < 2, reason="one numba thread on this machine")
def test_lr_re_solves_side_by_side_equal_one_thread():
    net, dem = _problem()
    states = _states(net)[1:]  # no full state: every one goes to the threads
    two = get_solver("lr").resolve(net, dem, states, [None] * len(states), ResolveSession())
    before = numba.get_num_threads()
    numba.set_num_threads(1)
    try:
        one = get_solver("lr").resolve(net, dem, states, [None] * len(states), ResolveSession())
    finally:
        numba.set_num_threads(before)
    for a, b in zip(one, two, strict=True):
        _assert_same(a, b)


STDOUT_PROBE = """
from concurrent.futures import ThreadPoolExecutor

import numpy as np
from rmkit import BookingState, get_solver
from rmkit.methods.base import ResolveSession
from rmkit.methods.shared.network_lp import quiet_highs
from tests.instances import random_problem

with ThreadPoolExecutor(4) as pool:  # models built side by side, many times
    list(pool.map(lambda _: quiet_highs(), range(400)))
net, dem = random_problem(31, n_legs=3, max_capacity=6, n_products=8, n_periods=20)
states = [BookingState(t % 19, tuple(int(c) for c in net.capacities)) for t in range(60)]
get_solver("rlp", samples=2).resolve(net, dem, states, list(range(60)), ResolveSession())
print("stdout still reaches the terminal", flush=True)
"""


def test_solves_side_by_side_keep_stdout(tmp_path):
    """Each HiGHS model is built with file descriptor 1 pointed at /dev/null (its banner would
    corrupt --json output). Threads building models side by side once interleaved the swap and
    left stdout on /dev/null for the rest of the process: `rmkit demo` printed nothing."""
    import os
    import subprocess
    import sys
    from pathlib import Path

    root = Path(__file__).resolve().parents[1]
    (tmp_path / "probe.py").write_text(STDOUT_PROBE)
    for _ in range(3):  # the race was not certain on every run
        out = subprocess.run([sys.executable, str(tmp_path / "probe.py")], capture_output=True,
                             text=True, timeout=300, cwd=root,
                             env={**os.environ, "PYTHONPATH": str(root)})
        assert out.returncode == 0, out.stderr
        assert "stdout still reaches the terminal" in out.stdout


@pytest.mark.skipif(numba.get_num_threads() < 2, reason="one numba thread on this machine")
def test_side_by_side_keeps_order_and_stops_at_the_first_error():
    import threading
    import time

    from rmkit.methods.shared.side_by_side import side_by_side

    assert side_by_side(lambda q: q * q, list(range(50))) == [q * q for q in range(50)]
    started = []
    lock = threading.Lock()

    def work(q: int) -> int:
        with lock:
            started.append(q)
        if q == 0:
            raise ValueError("solve 0 failed")
        time.sleep(0.01)
        return q

    with pytest.raises(ValueError, match="solve 0 failed"):
        side_by_side(work, list(range(200)))
    assert len(started) < 200  # the pieces not started were dropped, not run after the error
