"""The exact network DP: against brute force and quantecon, stored policy, refusals, queries."""

from __future__ import annotations

import itertools
import json

import numpy as np
import pytest
import scipy.sparse as sp

from rmkit import BookingState, DemandModel, InputError, Network, ProblemTooLargeError, get_solver
from rmkit.kernels import network_dp as kern
from rmkit.methods.shared.leg_dp import single_leg_dp
from rmkit.methods.shared.network_dp import (
    _layout,
    estimate,
    grid_states,
    grid_strides,
    marginal_values,
    solve_network_dp,
)
from tests.conftest import EXAMPLE
from tests.instances import brute_force_values, random_problem, small_problem


# ------------------------------------------------------------------ references
def quantecon_model(network: Network, prob_row: np.ndarray):
    """One period of the network DP as a quantecon DiscreteDP (state-action pairs, beta = 1).

    States are the capacity vectors in itertools.product order (last leg fastest); actions are
    the subsets of products to accept, those that fit; reward ``sum_j p_j f_j`` over accepted j,
    transitions to ``x - A_j`` with ``p_j`` and stay otherwise.
    """
    from quantecon.markov import DiscreteDP

    a = network.incidence
    caps = [range(int(c) + 1) for c in network.capacities]
    states = list(itertools.product(*caps))
    index = {x: k for k, x in enumerate(states)}
    s_ind, a_ind, rewards, rows, cols, vals = [], [], [], [], [], []
    n = network.n_products
    for k, x in enumerate(states):
        for act in range(2**n):
            chosen = [j for j in range(n) if act >> j & 1]
            if any(min(np.array(x) - a[:, j]) < 0 for j in chosen):
                continue
            row = len(s_ind)
            s_ind.append(k)
            a_ind.append(act)
            rewards.append(sum(prob_row[j] * network.fares[j] for j in chosen))
            stay = 1.0 - sum(prob_row[j] for j in chosen)
            for j in chosen:
                rows.append(row)
                cols.append(index[tuple(int(v) for v in np.array(x) - a[:, j])])
                vals.append(prob_row[j])
            rows.append(row)
            cols.append(k)
            vals.append(stay)
    q = sp.csr_matrix((vals, (rows, cols)), shape=(len(s_ind), len(states)))
    return DiscreteDP(np.array(rewards), q, 1.0, np.array(s_ind), np.array(a_ind))


def all_values(network, demand):
    """``(T+1, S)`` every V_t over the grid from one solve (V_0 plus probes of V_1..V_T)."""
    s = network.state_space_size
    dp = solve_network_dp(network, demand, probe=np.arange(s), keep_decisions=False)
    return np.vstack([dp.values[None, :], dp.probe_values])


def brute_table(network, demand):
    bf = brute_force_values(network, demand)
    states = [tuple(int(v) for v in x) for x in grid_states(network.capacities)]
    return np.array([[bf[t][x] for x in states] for t in range(demand.n_periods + 1)]), bf


def bit(bits, k, s, j):
    return bool(bits[k, s, j // 8] >> (j % 8) & 1)


# ------------------------------------------------------------------ correctness
@pytest.mark.parametrize("seed", range(6))
def test_every_value_matches_brute_force(seed):
    """Backward induction by dicts (tests/instances.py, Talluri & van Ryzin 2004, sec. 3.1)."""
    net, dem = random_problem(seed, n_legs=1 + seed % 3, max_capacity=4, n_products=5, n_periods=8)
    ref, _ = brute_table(net, dem)
    np.testing.assert_allclose(all_values(net, dem), ref, rtol=1e-9, atol=1e-12)


@pytest.mark.filterwarnings("ignore:infinite horizon solution methods are disabled")
def test_every_value_matches_quantecon_backward_induction():
    """quantecon.markov.backward_induction on a stationary 2-leg model gives every V_t."""
    from quantecon.markov import backward_induction

    net = Network.build(
        [("A", 3), ("B", 2)],
        [("a1", 120.0, ["A"]), ("a2", 60.0, ["A"]), ("b1", 90.0, ["B"]), ("ab", 170.0, ["A", "B"])],
    )
    row = np.array([0.15, 0.3, 0.2, 0.25])
    dem = DemandModel(np.tile(row, (10, 1)))
    vs, _ = backward_induction(quantecon_model(net, row), 10)
    np.testing.assert_allclose(all_values(net, dem), vs, rtol=1e-9, atol=1e-12)


@pytest.mark.filterwarnings("ignore:infinite horizon solution methods are disabled")
def test_time_varying_demand_matches_quantecon_step_by_step():
    """Per-period quantecon models, one backward-induction step each, on a 3-leg network."""
    from quantecon.markov import backward_induction

    net, dem = random_problem(21, n_legs=3, max_capacity=2, n_products=4, n_periods=6)
    v = np.zeros(net.state_space_size)
    expected = [v]
    for t in range(dem.n_periods - 1, -1, -1):
        vs, _ = backward_induction(quantecon_model(net, dem.probabilities[t]), 1, v_term=v)
        v = vs[0]
        expected.insert(0, v)
    np.testing.assert_allclose(all_values(net, dem), np.array(expected), rtol=1e-9, atol=1e-12)


def test_one_leg_network_equals_single_leg_dp_exactly():
    rng = np.random.default_rng(4)
    n, t_len, cap = 4, 60, 25
    fares = np.array([300.0, 180.0, 120.0, 75.0])
    raw = rng.uniform(size=(t_len, n))
    prob = raw / raw.sum(axis=1, keepdims=True) * 0.7
    net = Network.build([("L", cap)], [(f"P{j}", fares[j], ["L"]) for j in range(n)])
    dem = DemandModel(prob)
    single = single_leg_dp(prob, fares, cap)
    network = all_values(net, dem)
    np.testing.assert_array_equal(network, single.values)
    bits = solve_network_dp(net, dem).decision_bits
    for t in (0, 17, 59):
        for x in range(cap + 1):
            got = [bit(bits, t, x, j) for j in range(n)]
            assert got == single.accept(t, x).tolist()


@pytest.mark.parametrize("n_products", [5, 12, 20, 70])
def test_decision_bits_are_the_brute_force_decisions(n_products):
    """Every period, state and product; 12/20/70 products use 2-, 3- and 9-byte decision rows."""
    net, dem = random_problem(n_products, n_legs=2, max_capacity=3, n_products=n_products,
                              n_periods=5)
    _, bf = brute_table(net, dem)
    assert n_products < 12 or _layout(net).pair.any()  # neighbours on the same legs share a pass
    res = get_solver("exact").solve(net, dem)
    bits = res.policy.bits
    states = grid_states(net.capacities)
    assert bits.shape == (5, len(states), (n_products + 7) // 8) and bits.dtype == np.uint8
    a, f = net.incidence, net.fares
    for t in range(5):
        for s, x in enumerate(states):
            for j in range(n_products):
                y = x - a[:, j]
                if np.any(y < 0):
                    assert not bit(bits, t, s, j)
                    continue
                cost = bf[t + 1][tuple(x)] - bf[t + 1][tuple(y)]
                if abs(f[j] - cost) > 1e-9 * max(1.0, f[j]):  # ties accept; skip rounding ties
                    assert bit(bits, t, s, j) == (f[j] >= cost)


def test_kernels_match_their_py_func():
    net, dem = random_problem(5, n_legs=3, max_capacity=3, n_products=7, n_periods=4)
    lay = _layout(net)
    prob = np.ascontiguousarray(dem.probabilities)
    fare = np.ascontiguousarray(np.broadcast_to(net.fares, prob.shape))
    s = lay.n_states
    word_bit = (np.ones(1, np.uint8) << np.arange(7)).astype(np.uint8)
    word_mask = np.where(lay.mask > 0, 255, 0).astype(np.uint8)
    probe = np.array([0, 5, s - 1], dtype=np.uint64)

    head = (prob, fare, lay.offsets, lay.masked, lay.pair, lay.run_start, lay.run_stop,
            lay.run_ptr, lay.mask, word_mask)

    def serial(fn):
        layers, words, out = np.zeros(2 * s), np.zeros((4, s), np.uint8), np.zeros((4, 3))
        fn(*head, layers, words, word_bit, True, probe, out, np.uint64(7))
        return layers[: 2 * s], words, out

    def pipeline(fn, split, batch):
        slots = 2 * batch + 1
        layers, words, out = np.zeros(slots * s), np.zeros((4, s), np.uint8), np.zeros((4, 3))
        fn(*head, layers, slots, words, word_bit, True, probe, out, np.uint64(7),
           np.uint64(split), batch)
        return layers[: 2 * s], words, out

    compiled = serial(kern.network_values_serial)
    for other in (serial(kern.network_values_serial.py_func),
                  pipeline(kern.network_values, s // 2, 1), pipeline(kern.network_values, 7, 3),
                  pipeline(kern.network_values.py_func, s // 3, 2)):
        for x, y in zip(compiled, other, strict=True):
            np.testing.assert_array_equal(x, y)


def test_results_do_not_depend_on_threads_or_tiles():
    net, dem = small_problem()
    runs = [solve_network_dp(net, dem, parallel=p, tile=t) for p in (False, True) for t in (5, 4096)]
    for r in runs[1:]:
        np.testing.assert_array_equal(r.values, runs[0].values)
        np.testing.assert_array_equal(r.decision_bits, runs[0].decision_bits)


# ------------------------------------------------------------------ solver result
def test_solver_result_and_stored_policy_format():
    net, dem = small_problem()
    ref, bf = brute_table(net, dem)
    res = get_solver("exact").solve(net, dem)
    c = tuple(int(v) for v in net.capacities)
    assert res.value == pytest.approx(bf[0][c], rel=1e-12)
    strides = res.policy.strides
    assert strides.dtype == np.int64 and strides.tolist() == grid_strides(net.capacities).tolist()
    assert strides[-1] == 1
    np.testing.assert_allclose(res.policy.values, ref[0], rtol=1e-12)
    for i in range(net.n_legs):
        y = list(c)
        y[i] -= 1
        assert res.bid_prices[i] == pytest.approx(bf[1][c] - bf[1][tuple(y)], rel=1e-9)
    for j in range(net.n_products):
        y = tuple(int(v) for v in np.array(c) - net.incidence[:, j])
        assert res["opportunity_cost"][j] == pytest.approx(bf[1][c] - bf[1][y], rel=1e-9)
    assert set(res.to_dataset().data_vars) == {"value", "bid_price", "opportunity_cost"}


def test_mid_horizon_state_uses_the_full_grid():
    net, dem = small_problem()
    _, bf = brute_table(net, dem)
    x0 = (1, 0, 2)
    res = get_solver("exact").solve(net, dem, state=BookingState(period=5, capacity=x0))
    assert res.value == pytest.approx(bf[5][x0], rel=1e-12)
    assert res.policy.bits.shape[:2] == (dem.n_periods - 5, net.state_space_size)
    assert res.policy.t0 == 5
    assert np.isinf(res.bid_prices[1]) and np.all(np.isfinite(res.bid_prices[[0, 2]]))
    unsellable = np.any(np.array(x0)[:, None] < net.incidence, axis=0)
    assert np.all(np.isinf(res["opportunity_cost"][unsellable]))


def test_keep_decisions_off_drops_the_bits_only():
    net, dem = small_problem()
    full = get_solver("exact").solve(net, dem)
    lean = get_solver("exact", keep_decisions=False).solve(net, dem)
    assert lean.policy.bits.shape[0] == 0 and full.policy.bits.shape[0] == dem.n_periods
    assert lean.value == full.value


# ------------------------------------------------------------------ refusals
def big_network():
    legs = [(f"L{i}", 40) for i in range(6)]
    return Network.build(legs, [(f"P{i}", 100.0, [f"L{i}"]) for i in range(6)])


def test_too_large_is_refused_up_front_with_figures():
    net = big_network()
    dem = DemandModel(np.full((100, 6), 0.1))
    solver = get_solver("exact")
    reason = solver.accepts(net, dem)
    assert reason is not None and "4,750,104,241 states" in reason
    assert "GiB" in reason and "dpd" in reason and "lr" in reason
    with pytest.raises(ProblemTooLargeError, match="max_memory_gb"):
        solver.solve(net, dem)


def test_memory_limit_is_a_parameter():
    net, dem = small_problem()
    need = estimate(net, dem.n_periods).gigabytes
    assert get_solver("exact", max_memory_gb=need * 2).accepts(net, dem) is None
    tight = get_solver("exact", max_memory_gb=need / 2)
    assert tight.accepts(net, dem) is not None
    with pytest.raises(ProblemTooLargeError):
        tight.solve(net, dem)
    with pytest.raises(InputError, match="'max_memory_gb' parameter of exact"):
        get_solver("exact", max_memory_gb=-1).solve(net, dem)


# ------------------------------------------------------------------ queries
def test_marginal_values_at_period_state_pairs_match_brute_force():
    net, dem = small_problem()
    _, bf = brute_table(net, dem)
    states = np.minimum(np.array([[3, 2, 1], [0, 1, 1], [1, 1, 0], [3, 2, 1]]), net.capacities)
    periods = np.array([2, 5, dem.n_periods - 1, 0])
    leg, cost = marginal_values(net, dem, periods, states)
    assert leg.shape == (4, net.n_legs) and cost.shape == (4, net.n_products)
    for q, (t, x) in enumerate(zip(periods, states, strict=True)):
        for i in range(net.n_legs):
            if x[i] == 0:
                assert np.isinf(leg[q, i])
                continue
            y = x.copy()
            y[i] -= 1
            want = bf[t + 1][tuple(x)] - bf[t + 1][tuple(y)]
            assert leg[q, i] == pytest.approx(want, rel=1e-9, abs=1e-9)
        for j in range(net.n_products):
            y = x - net.incidence[:, j]
            if np.any(y < 0):
                assert np.isinf(cost[q, j])
            else:
                assert cost[q, j] == pytest.approx(bf[t + 1][tuple(x)] - bf[t + 1][tuple(y)],
                                                   rel=1e-9, abs=1e-9)
    # the solver's own query is the same function with its memory setting
    got = get_solver("exact").marginal_values(net, dem, periods, states)
    np.testing.assert_array_equal(got[0], leg)


def test_marginal_value_queries_refuse_outputs_above_the_memory_limit():
    net, dem = small_problem()
    states = grid_states(net.capacities)
    with pytest.raises(ProblemTooLargeError, match="fewer states"):
        marginal_values(net, dem, np.zeros(len(states), np.int64), states, max_memory_gb=1e-6)
    with pytest.raises(InputError, match="periods"):
        marginal_values(net, dem, np.array([dem.n_periods]), states[:1])


def test_bound_command_on_the_bundled_example(capsys):
    from rmkit.cli import main

    assert main(["bound", str(EXAMPLE), "--method", "exact", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["kind"] == "optimum" and out["value"] > 0


def test_for_value_drops_the_decisions_unless_asked():
    from rmkit import get_solver

    assert get_solver("exact").for_value().get_params()["keep_decisions"] is False
    assert get_solver("exact", keep_decisions=True).for_value().get_params()["keep_decisions"]
    dlp = get_solver("dlp")
    assert dlp.for_value() is dlp  # nothing to drop
