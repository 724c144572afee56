"""DP decomposition (dpd) and Lagrangian relaxation (lr): kernels, bounds, published values.

External references used here:
* Topaloglu (2009), Operations Research 57(3):637-649, Table 1: the LR and DLP bounds of the six
  vendored 4-spoke 200-period hub-and-spoke instances (tests/published.py).
* Brute-force backward induction of the network DP (tests/instances.brute_force_values): the
  exact optimum, which every valid bound must reach.
* scipy.optimize.linprog(method="highs"): the Lagrangian dual written as one linear program
  (:func:`lagrangian_lp_bound`, built here independently of rmkit's kernels), whose optimum is the
  exact minimum of the bound over fare splits.
* Plain-Python forward recursion for the kernels' expected sales.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.optimize import linprog

from rmkit import BookingState, DemandModel, Network, get_solver
from rmkit.kernels.decomposition import (
    average_and_lower_bound,
    leg_acceptance_batch,
    split_direction,
    step_and_project,
)
from rmkit.kernels.single_leg import leg_values_batch
from rmkit.methods.dpd import displaced_fares
from rmkit.methods.shared.leg_dp import leg_tables, product_legs
from rmkit.model.scenario import load_scenario
from tests.conftest import vendored
from tests.instances import brute_force_values, random_problem, small_problem
from tests.published import DLP_BOUND, LR_BOUND, POLICY_REVENUE


# --------------------------------------------------------------------------- independent references
def lagrangian_lp_bound(network: Network, prob: np.ndarray, capacity: np.ndarray) -> float:
    """The minimum over fare splits of the sum of leg values, as one LP solved by HiGHS.

    For fixed splits lambda, the least ``v_i(0, x_i)`` over functions with ``v_i(t, x) >=
    v_i(t+1, x) + sum_j p_tj w_itjx`` and ``w_itjx >= max(0, lambda_itj - v_i(t+1, x) +
    v_i(t+1, x-1))`` is the single-leg DP value (the recursion is monotone in v_i(t+1, .)), so
    minimising jointly over v, w and the splits (sum over a product's legs = fare, lambda >= 0)
    gives the Lagrangian bound's minimum (Topaloglu 2009, the dual of problem (9)-style LP).
    """
    a = network.incidence
    f = network.fares
    n_periods, n = prob.shape
    count = 0

    def new() -> int:
        nonlocal count
        count += 1
        return count - 1

    v = {(i, t, x): new() for i in range(network.n_legs) for t in range(n_periods)
         for x in range(int(network.capacities[i]) + 1)}
    lam = {(i, t, j): new() for j in range(n) if a[:, j].sum() > 1
           for i in np.flatnonzero(a[:, j]) for t in range(n_periods)}
    w = {(i, t, j, x): new() for i in range(network.n_legs) for j in np.flatnonzero(a[i])
         for t in range(n_periods) if prob[t, j] > 0
         for x in range(1, int(network.capacities[i]) + 1)}
    rows: list[list[tuple[int, float]]] = []
    rhs: list[float] = []
    for i in range(network.n_legs):
        for t in range(n_periods):
            for x in range(int(network.capacities[i]) + 1):
                row = [(v[i, t, x], -1.0)]  # v(t+1, x) + sum_j p w - v(t, x) <= 0
                if t + 1 < n_periods:
                    row.append((v[i, t + 1, x], 1.0))
                row += [(w[i, t, j, x], prob[t, j]) for j in np.flatnonzero(a[i])
                        if (i, t, j, x) in w]
                rows.append(row)
                rhs.append(0.0)
                for j in np.flatnonzero(a[i]):
                    if (i, t, j, x) not in w:
                        continue
                    row = [(w[i, t, j, x], -1.0)]  # lambda - dv - w <= 0
                    if t + 1 < n_periods:
                        row += [(v[i, t + 1, x], -1.0), (v[i, t + 1, x - 1], 1.0)]
                    if (i, t, j) in lam:
                        row.append((lam[i, t, j], 1.0))
                        rhs.append(0.0)
                    else:
                        rhs.append(-float(f[j]))
                    rows.append(row)
    r_idx = [r for r, row in enumerate(rows) for _ in row]
    c_idx = [c for row in rows for c, _ in row]
    vals = [coef for row in rows for _, coef in row]
    a_ub = sp.csr_matrix((vals, (r_idx, c_idx)), shape=(len(rows), count))
    groups = {}
    for (_, t, j), col in lam.items():
        groups.setdefault((t, j), []).append(col)
    a_eq = sp.lil_matrix((max(len(groups), 1), count))
    b_eq = np.zeros(max(len(groups), 1))
    for k, ((_, j), cols) in enumerate(sorted(groups.items())):
        a_eq[k, cols] = 1.0
        b_eq[k] = f[j]
    cost = np.zeros(count)
    for i in range(network.n_legs):
        cost[v[i, 0, int(capacity[i])]] = 1.0
    bounds = [(None, None)] * count
    for col in [*lam.values(), *w.values()]:
        bounds[col] = (0.0, None)
    res = linprog(cost, A_ub=a_ub, b_ub=np.array(rhs), A_eq=a_eq.tocsr() if groups else None,
                  b_eq=b_eq if groups else None, bounds=bounds, method="highs")
    assert res.status == 0, res.message
    return float(res.fun)


def plain_forward(prob, fare, values, capacity, start):
    """Sales probabilities of one leg's optimal policy, by plain Python over states (dicts)."""
    n_periods, n = prob.shape
    dist = {start: 1.0}
    sales = np.zeros((n_periods, n))
    for t in range(n_periods):
        nxt: dict[int, float] = {}
        for x, px in dist.items():
            stay = px
            for j in range(n):
                sells = x >= 1 and fare[t, j] > 0 and fare[t, j] >= values[t + 1, x] - values[t + 1, x - 1]
                if sells:
                    sales[t, j] += px * prob[t, j]
                    nxt[x - 1] = nxt.get(x - 1, 0.0) + px * prob[t, j]
                    stay -= px * prob[t, j]
            nxt[x] = nxt.get(x, 0.0) + stay
        dist = nxt
    return sales


def exact_value(net, dem, period=0, capacity=None):
    x = tuple(int(c) for c in (net.capacities if capacity is None else capacity))
    return brute_force_values(net, dem)[period][x]


def quiet_solve(name, net, dem, state=None, **settings):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)
        return get_solver(name, **settings).solve(net, dem, state=state)


# --------------------------------------------------------------------------- kernels
def _random_legs(seed, n_legs=3, n_periods=10, n=4, cap=5):
    rng = np.random.default_rng(seed)
    raw = rng.uniform(0.05, 1.0, (n_periods, n))
    prob = raw / raw.sum(axis=1, keepdims=True) * 0.9
    fares = rng.uniform(-20, 200, (n_legs, n_periods, n))
    caps = rng.integers(0, cap + 1, n_legs)
    caps[0] = cap
    start = np.array([rng.integers(0, c + 1) for c in caps])
    values = np.empty((n_legs, n_periods + 1, cap + 1))
    leg_values_batch(prob, fares, caps, values)
    return prob, fares, caps, start, values


@pytest.mark.parametrize("seed", range(4))
def test_forward_pass_matches_plain_python(seed):
    prob, fares, caps, start, values = _random_legs(seed)
    occ = np.empty_like(values)
    acc = np.empty(fares.shape)
    leg_acceptance_batch(prob, fares, caps, start, values, occ, acc)
    for i in range(fares.shape[0]):
        ref = plain_forward(prob, fares[i], values[i], int(caps[i]), int(start[i]))
        np.testing.assert_allclose(acc[i], ref, rtol=1e-12, atol=1e-14)
        # the revenue of the optimal policy is the value (Bellman's principle)
        assert (fares[i] * acc[i]).sum() == pytest.approx(values[i, 0, start[i]], rel=1e-10,
                                                          abs=1e-10)
        np.testing.assert_allclose(occ[i, :, : caps[i] + 1].sum(axis=1), 1.0, rtol=1e-12)


def test_kernels_match_their_py_func():
    prob, fares, caps, start, values = _random_legs(9)
    occ_a, occ_b = np.empty_like(values), np.empty_like(values)
    acc_a, acc_b = np.empty(fares.shape), np.empty(fares.shape)
    leg_acceptance_batch(prob, fares, caps, start, values, occ_a, acc_a)
    leg_acceptance_batch.py_func(prob, fares, caps, start, values, occ_b, acc_b)
    np.testing.assert_array_equal(acc_a, acc_b)
    np.testing.assert_array_equal(occ_a, occ_b)

    net, dem = small_problem()
    legs = product_legs(net)
    p = np.ascontiguousarray(dem.probabilities)
    rng = np.random.default_rng(2)
    acc = rng.uniform(0, 0.1, (net.n_legs, dem.n_periods, net.n_products))
    d_a, d_b = np.zeros_like(acc), np.zeros_like(acc)
    assert split_direction(p, acc, legs, d_a) == split_direction.py_func(p, acc, legs, d_b)
    np.testing.assert_array_equal(d_a, d_b)
    lam = rng.uniform(0, 100, acc.shape)
    lam_a, lam_b = lam.copy(), lam.copy()
    out_a, out_b = lam.copy(), lam.copy()
    step_and_project(lam_a, d_a, 30.0, net.fares, legs, p, np.empty(6), out_a)
    step_and_project.py_func(lam_b, d_a, 30.0, net.fares, legs, p, np.empty(6), out_b)
    np.testing.assert_array_equal(out_a, out_b)
    np.testing.assert_array_equal(lam_a, lam)  # the input is read only
    avg_a, avg_b = np.full_like(acc, 0.05), np.full_like(acc, 0.05)
    lb_a = average_and_lower_bound(acc, avg_a, 0.25, net.fares, legs)
    lb_b = average_and_lower_bound.py_func(acc, avg_b, 0.25, net.fares, legs)
    assert lb_a == lb_b
    np.testing.assert_array_equal(avg_a, avg_b)


def test_projection_onto_scaled_simplex():
    """Optimality conditions of the Euclidean projection, and scipy's SLSQP as a cross-check."""
    from scipy.optimize import minimize

    three = Network.build([("A", 1), ("B", 1), ("C", 1)], [("ABC", 90.0, ["A", "B", "C"])])
    two = Network.build([("A", 1), ("B", 1)], [("AB", 90.0, ["A", "B"])])  # the clip fast path
    prob = np.array([[0.5]])
    rng = np.random.default_rng(4)
    for trial in range(40):
        net = three if trial % 2 else two
        legs = product_legs(net)
        y = rng.uniform(-60, 150, net.n_legs)
        lam = y.reshape(net.n_legs, 1, 1).copy()
        step_and_project(lam, np.zeros_like(lam), 0.0, net.fares, legs, prob, np.empty(6), lam)
        z = lam.ravel()
        assert z.sum() == pytest.approx(90.0) and z.min() >= 0
        # KKT: z = max(y - theta, 0) for one theta
        theta = (y - z)[z > 0]
        assert np.ptp(theta) < 1e-9 and np.all(y[z == 0] <= theta[0] + 1e-9)
        ref = minimize(lambda v, y=y: ((v - y) ** 2).sum(), np.full(y.size, 30.0),
                       method="SLSQP", bounds=[(0, None)] * y.size,
                       constraints=[{"type": "eq", "fun": lambda v: v.sum() - 90.0}]).x
        np.testing.assert_allclose(z, ref, atol=1e-3)


# --------------------------------------------------------------------------- leg tables
def test_leg_tables_follow_the_schema_conventions():
    net, dem = small_problem()
    res = quiet_solve("lr", net, dem)
    leg_value, table = res["leg_value"], res["bid_price_table"]
    T = dem.n_periods
    for i, c in enumerate(net.capacities):
        assert np.all(np.isinf(table[:, 0, i]))
        assert np.all(np.isnan(table[:, c + 1 :, i])) and np.all(np.isnan(leg_value[:, c + 1 :, i]))
        for t in range(T - 1):
            np.testing.assert_allclose(table[t, 1 : c + 1, i],
                                       np.diff(leg_value[t + 1, : c + 1, i]), rtol=1e-12)
        # last period: v(T, .) = 0, so every seat is worth nothing
        np.testing.assert_array_equal(table[T - 1, 1 : c + 1, i], 0.0)
    x = net.capacities
    assert leg_value[0, x, np.arange(net.n_legs)].sum() == pytest.approx(res.value, rel=1e-12)
    np.testing.assert_array_equal(res.bid_prices, table[0, x, np.arange(net.n_legs)])


def test_leg_tables_helper_on_a_hand_example():
    # one leg, 2 periods, capacity 1: v(2) = 0, v(1, 1) = 0.5 * 10, v(0, 1) = 5 + 0.5 * 5
    values = np.array([[[0.0, 7.5], [0.0, 5.0], [0.0, 0.0]]])
    leg_value, table = leg_tables(values)
    assert leg_value[:, :, 0].tolist() == [[0.0, 7.5], [0.0, 5.0]]
    assert table[:, 1, 0].tolist() == [5.0, 0.0] and np.all(np.isinf(table[:, 0, 0]))


# --------------------------------------------------------------------------- LR bound
def test_lr_on_one_leg_equals_the_exact_optimum():
    net = Network.build([("L", 4)], [("a", 50.0, ["L"]), ("b", 120.0, ["L"]), ("c", 200.0, ["L"])])
    rng = np.random.default_rng(0)
    raw = rng.uniform(0.1, 1.0, (15, 3))
    dem = DemandModel(raw / raw.sum(axis=1, keepdims=True) * 0.7)
    res = quiet_solve("lr", net, dem)
    assert res.status == "optimal"
    assert res.value == pytest.approx(exact_value(net, dem), rel=1e-12)
    # with only single-leg products the network DP separates: LR is exact there too
    net2, dem2 = random_problem(3, n_legs=2, max_capacity=3, n_products=2, n_periods=8)
    assert quiet_solve("lr", net2, dem2).value == pytest.approx(exact_value(net2, dem2), rel=1e-12)


def test_lr_with_capacity_to_spare_is_exact_at_once():
    """Every request can be sold: optimum = DLP = sum_j f_j E[D_j] (by hand); one iteration."""
    net = Network.build([("A", 6), ("B", 6)],
                        [("a", 80.0, ["A"]), ("ab", 150.0, ["A", "B"]), ("b", 60.0, ["B"])])
    dem = DemandModel(np.tile([0.2, 0.3, 0.1], (5, 1)))
    res = quiet_solve("lr", net, dem)
    expected = float(net.fares @ dem.demand_to_come(0))
    assert res.status == "optimal" and res.payload["iterations"] == 1
    assert res.value == pytest.approx(expected, rel=1e-12)
    assert res["gap_history"][-1] <= 1e-12
    assert get_solver("dlp").solve(net, dem).value == pytest.approx(expected, rel=1e-9)


@pytest.mark.parametrize("seed", range(5))
def test_exact_le_lr_le_dlp_and_lr_reaches_the_lp_minimum(seed):
    net, dem = random_problem(seed, n_legs=3, max_capacity=3, n_products=6, n_periods=8)
    exact = exact_value(net, dem)
    res = quiet_solve("lr", net, dem, max_iterations=1000, tol=1e-4, stall_tol=0.0)
    lp = lagrangian_lp_bound(net, np.asarray(dem.probabilities), net.capacities)
    dlp = get_solver("dlp").solve(net, dem).value
    assert exact <= lp + 1e-7 and lp <= dlp + 1e-7
    assert res.value >= lp - 1e-7 * lp  # a valid bound is never below the minimum
    assert res.value <= lp * (1 + 1e-3)  # and the multipliers are optimised
    assert res.payload["lower_bound"] <= lp + 1e-7 * lp  # the certificate is sound
    assert res.value <= dlp + 1e-9


def test_lr_from_a_mid_horizon_state_bounds_the_exact_value_to_go():
    net, dem = small_problem()
    values = brute_force_values(net, dem)
    for period, x in [(4, (2, 1, 3)), (9, (1, 0, 2)), (11, (3, 3, 3))]:
        x = tuple(min(a, int(c)) for a, c in zip(x, net.capacities, strict=True))
        res = quiet_solve("lr", net, dem, state=BookingState(period, x))
        assert res.value >= values[period][x] - 1e-9
        assert res["bid_price_table"].shape[0] == dem.n_periods - period


def test_history_is_monotone_and_gap_certified():
    net, dem = small_problem()
    res = quiet_solve("lr", net, dem, max_iterations=200)
    bh, gh = res["bound_history"], res["gap_history"]
    assert bh.size == gh.size == res.payload["iterations"]
    assert np.all(np.diff(bh) <= 1e-12) and np.all(gh >= 0)
    assert bh[-1] == pytest.approx(res.value, rel=1e-12)
    assert gh[-1] == pytest.approx((res.value - res.payload["lower_bound"]) / res.value)


def test_iteration_limit_gives_status_and_warning():
    net, dem = small_problem()
    with pytest.warns(RuntimeWarning, match="max_iterations"):
        res = get_solver("lr", max_iterations=2, tol=1e-9).solve(net, dem)
    assert res.status == "iteration_limit"
    assert res.value >= exact_value(net, dem) - 1e-9


def test_multipliers_split_each_fare():
    net, dem = small_problem()
    lam = quiet_solve("lr", net, dem)["multiplier"]  # (period, leg, product)
    a = net.incidence
    np.testing.assert_allclose(lam.sum(axis=1), np.broadcast_to(net.fares, lam[:, 0].shape),
                               rtol=1e-12)
    assert np.all(lam >= 0) and np.all(lam[:, a == 0] == 0)


def test_warm_start_is_valid_and_independent_of_history():
    net, dem = small_problem()
    state = BookingState(6, (1, 2, 1))
    first = quiet_solve("lr", net, dem, state=state, warm_start=True)
    quiet_solve("lr", net, dem, state=BookingState(3, (2, 2, 2)), warm_start=True)
    again = quiet_solve("lr", net, dem, state=state, warm_start=True)
    np.testing.assert_array_equal(first["multiplier"], again["multiplier"])
    assert first.value == again.value
    assert first.value >= exact_value(net, dem, 6, (1, 2, 1)) - 1e-9


# --------------------------------------------------------------------------- published values
VENDORED = sorted(n for n in LR_BOUND if vendored(n).exists())

# The two alpha = 1.6 instances: the default run lands 0.5-0.65% under the published LR bound
# (rm_200_4_1.6_4.0: 16513 vs 16600; rm_200_4_1.6_8.0: 29228 vs 29413; on 1.6_8.0 the DLP-dual
# split we start from already gives 29257). Every fare split gives a valid bound (exact <= LR is
# checked on small networks above, and the minimum against the HiGHS LP reformulation), and
# 3000-iteration runs certify the minimum lies within 0.2% and 0.3% under our values (certified
# lower bounds 16480 and 29128), so the published figures sit above the minimum over splits and no
# well-optimised run can come within 0.5% under them. There, only the side of the check that
# reveals badly optimised multipliers applies, with the value kept within 1% of the figure.
BELOW_PUBLISHED = {"rm_200_4_1.6_4.0", "rm_200_4_1.6_8.0"}


@pytest.mark.parametrize("name", VENDORED)
def test_lr_bound_matches_published_value(name):
    scen = load_scenario(vendored(name))
    res = quiet_solve("lr", scen.network, scen.demand)
    published = LR_BOUND[name]  # Topaloglu (2009), Table 1: LR bound, whole currency units.
    assert res.value <= published * 1.005, (name, res.value)
    low = 0.99 if name in BELOW_PUBLISHED else 0.995
    assert res.value >= published * low, (name, res.value)
    assert res.payload["lower_bound"] <= res.value
    # Topaloglu (2009), Table 1: the DLP bound of the same instance; LR must not exceed it.
    assert res.value <= DLP_BOUND[name] + 0.5
    # Topaloglu (2009), Table 2: simulated revenues of the DLP and LR policies (100 paths, about
    # 0.5% sampling noise). A valid bound exceeds any policy's expected revenue; 1% for the noise.
    assert res.value >= 0.99 * max(POLICY_REVENUE[name].values()), (name, res.value)


# --------------------------------------------------------------------------- DPD
def test_dpd_on_one_leg_equals_the_exact_optimum():
    net = Network.build([("L", 3)], [("a", 40.0, ["L"]), ("b", 100.0, ["L"])])
    dem = DemandModel(np.tile([0.3, 0.2], (10, 1)))
    res = get_solver("dpd").solve(net, dem)
    assert res.value == pytest.approx(exact_value(net, dem), rel=1e-12)
    values = brute_force_values(net, dem)
    for t in range(10):
        got = res["leg_value"][t, :, 0]
        np.testing.assert_allclose(got, [values[t][(x,)] for x in range(4)], rtol=1e-12)


def test_displaced_fares_by_hand():
    net = Network.build([("A", 2), ("B", 1)],
                        [("a", 100.0, ["A"]), ("ab", 150.0, ["A", "B"]), ("b", 30.0, ["B"])])
    fares = displaced_fares(net, np.array([20.0, 60.0]))
    assert fares.tolist() == [[100.0, 90.0, 0.0], [0.0, 130.0, 30.0]]
    fares = displaced_fares(net, np.array([200.0, np.inf]))  # leg B full: ab counts for nothing
    assert fares.tolist() == [[100.0, 0.0, 0.0], [0.0, 0.0, 30.0]]


def test_dpd_uses_the_dlp_duals_and_iterates():
    net, dem = small_problem()
    res = get_solver("dpd").solve(net, dem)
    duals = get_solver("dlp").solve(net, dem)["bid_price"]
    np.testing.assert_array_equal(res["net_fare"], displaced_fares(net, duals))
    # the leg tables are the single-leg DPs of those fares
    values = np.empty((net.n_legs, dem.n_periods + 1, net.max_capacity + 1))
    fares = np.broadcast_to(res["net_fare"][:, None, :], (net.n_legs, dem.n_periods,
                                                          net.n_products))
    leg_values_batch(np.asarray(dem.probabilities), np.ascontiguousarray(fares), net.capacities,
                     values)
    np.testing.assert_allclose(res["leg_value"], values[:, :-1].transpose(1, 2, 0), rtol=1e-12)
    again = get_solver("dpd", iterations=3).solve(net, dem)
    assert not np.array_equal(again["net_fare"], res["net_fare"])
    assert again.status == "optimal" and np.all(again.bid_prices >= 0)


def test_dpd_mid_horizon_with_a_full_leg():
    net, dem = small_problem()
    x = (0, int(net.capacities[1]), int(net.capacities[2]))
    res = get_solver("dpd", iterations=2).solve(net, dem, state=BookingState(5, x))
    assert np.isinf(res.bid_prices[0]) and np.all(np.isfinite(res.bid_prices[1:]))
    # products through the full leg count for nothing elsewhere
    through = net.incidence[0] > 0
    assert np.all(res["net_fare"][1:, through] == 0)


# --------------------------------------------------------------------------- CLI
def test_cli_bound_and_bidprices(tmp_path, capsys):
    from rmkit.cli import main

    path = str(vendored("rm_200_4_1.6_8.0"))
    assert main(["bound", path, "--method", "lr", "--json", "--param", "max_iterations=20"]) == 0
    out = capsys.readouterr().out
    assert '"method": "lr"' in out
    assert main(["bidprices", path, "--method", "dpd", "--period", "100", "--json"]) == 0
    assert '"dpd"' in capsys.readouterr().out
