"""Independent references for the simulator tests: plain-Python replays and hand-built policies.

Nothing here imports the simulator. The replay is a direct transcription of the control rules
(one path, one period at a time, dicts and lists); the policies come from brute-force backward
induction (tests/instances.py) and from scipy's HiGHS linear programming, so the simulator is
checked against code it shares nothing with.
"""

from __future__ import annotations

from contextlib import contextmanager

import numpy as np
from scipy.optimize import linprog

from rmkit import DemandModel, Network, Solver, SolveResult, Tags
from rmkit.methods.base import SolveOutput
from rmkit.results import StatePolicy
from tests.instances import brute_force_values

TOL = 1e-9  # the documented rounding slack of the rule fare >= sum of bid prices


def grid_strides(network: Network) -> np.ndarray:
    """Row-major strides over the full-capacity grid, computed by hand."""
    dims = [int(c) + 1 for c in network.capacities]
    return np.array([int(np.prod(dims[i + 1 :])) for i in range(len(dims))], dtype=np.int64)


def brute_force_decisions(network: Network, demand: DemandModel) -> tuple[dict, SolveResult]:
    """(values, result) where the result carries decision bits of the optimal policy.

    Accept j in period t at state x iff x - A_j >= 0 and f_j >= V_{t+1}(x) - V_{t+1}(x - A_j)
    (Talluri & van Ryzin 2004, section 3.1), packed as a stored policy (``result.policy``).
    """
    values = brute_force_values(network, demand)
    a, f = network.incidence, network.fares
    n, T = network.n_products, demand.n_periods
    strides = grid_strides(network)
    bits = np.zeros((T, network.state_space_size, (n + 7) // 8), dtype=np.uint8)
    for t in range(T):
        nxt = values[t + 1]
        for x in nxt:
            s = int(np.dot(x, strides))
            for j in range(n):
                y = tuple(int(xi - ai) for xi, ai in zip(x, a[:, j], strict=True))
                if min(y) >= 0 and f[j] >= nxt[x] - nxt[y]:
                    bits[t, s, j // 8] |= np.uint8(1 << (j % 8))
    c = tuple(int(v) for v in network.capacities)
    result = SolveResult(
        method="brute-force-dp",
        network=network,
        n_periods=T,
        variables={"value": np.float64(values[0][c])},
        policy=StatePolicy(bits, strides),
    )
    return values, result


def one_leg_table(network: Network, demand: DemandModel) -> SolveResult:
    """Bid-price table of the one-leg optimum: V_{t+1}(x) - V_{t+1}(x-1), +inf at x = 0."""
    values = brute_force_values(network, demand)
    c = int(network.capacities[0])
    table = np.full((demand.n_periods, c + 1, 1), np.inf)
    for t in range(demand.n_periods):
        for x in range(1, c + 1):
            table[t, x, 0] = values[t + 1][(x,)] - values[t + 1][(x - 1,)]
    return SolveResult(method="one-leg-dp-table", network=network, n_periods=demand.n_periods,
                       variables={"bid_price_table": table})


def linprog_dlp(network: Network, mean_demand: np.ndarray, capacity: np.ndarray):
    """DLP value, duals and allocation with scipy's HiGHS (an independent LP reference)."""
    res = linprog(
        -network.fares,
        A_ub=network.incidence.astype(float),
        b_ub=np.asarray(capacity, dtype=float),
        bounds=list(zip(np.zeros(network.n_products), mean_demand, strict=True)),
        method="highs",
    )
    assert res.status == 0, res.message
    return -res.fun, -res.ineqlin.marginals, res.x


class LinprogBidPrices(Solver):
    """DLP leg duals from scipy linprog (Talluri & van Ryzin 2004, section 3.3.1); test-only,
    not registered."""

    name = "linprog-dlp"
    tags = Tags(upper_bound=True, control="bid_price")
    citation = "K. T. Talluri and G. J. van Ryzin (2004), The Theory and Practice of RM, 3.3.1"

    def _solve(self, problem, params, seed):
        value, duals, _ = linprog_dlp(problem.network, problem.demand_to_come, problem.capacity)
        return SolveOutput({"value": np.float64(value), "bid_price": duals})


class LinprogNestedLimits(Solver):
    """Nested booking limits from DLP allocations, test-only: on each leg the buckets are its
    products by descending fare, and bucket b may sell the seats left minus the allocations of
    the more valuable buckets (nesting DLP allocations; Williamson 1992)."""

    name = "linprog-nested"
    tags = Tags(heuristic=True, control="nested")
    citation = "E. L. Williamson (1992), Airline Network Seat Inventory Control, PhD thesis, MIT"

    def _solve(self, problem, params, seed):
        net = problem.network
        _, _, y = linprog_dlp(net, problem.demand_to_come, problem.capacity)
        m, n = net.n_legs, net.n_products
        bucket = np.full((m, n), -1, dtype=np.int64)
        limit = np.zeros((m, n))
        for i in range(m):
            used = [j for j in np.argsort(-net.fares, kind="stable") if net.incidence[i, j]]
            protected = 0.0
            for b, j in enumerate(used):
                bucket[i, j] = b
                limit[i, b] = problem.capacity[i] - np.floor(protected)
                protected += y[j]
        return SolveOutput({"booking_limit": limit, "product_bucket": bucket})


class RecordingPolicy(Solver):
    """Wraps a solver and records every (period, seats left) it is solved from; test-only."""

    name = "recording"
    citation = "test helper (no method of its own), 2026"

    def __init__(self, inner: Solver) -> None:
        super().__init__()
        self.inner = inner
        self.calls: list[tuple[int, tuple[int, ...]]] = []
        self.tags = inner.tags

    def solve(self, network, demand, *, state=None, seed=None):
        self.calls.append((state.period, tuple(state.capacity)))
        return self.inner.solve(network, demand, state=state, seed=seed)


def reference_replay(network, streams, control, control_at, points, every_sale=False):
    """Plain-Python replay: (revenue, accepted, rejected, seats_left, solves) per path.

    ``control_at(t, x)`` returns the control's SolveResult (or None for fcfs); it is called at the
    periods in ``points`` and, with ``every_sale``, in the period after each sale.
    """
    a, f = network.incidence, network.fares
    n_paths, T = streams.shape
    m, n = a.shape
    revenue = np.zeros(n_paths)
    accepted = np.zeros((n_paths, n), dtype=np.int64)
    rejected = np.zeros((n_paths, n), dtype=np.int64)
    seats_left = np.zeros((n_paths, m), dtype=np.int64)
    solves: set = set()
    for k in range(n_paths):
        x = [int(c) for c in network.capacities]
        res, sold, again = None, {}, False
        for t in range(T):
            if t in points or again:
                res, sold, again = control_at(t, np.array(x)), {}, False
                solves.add((t, tuple(x)))
            j = int(streams[k, t])
            if j < 0:
                continue
            legs = [i for i in range(m) if a[i, j]]
            ok = all(x[i] >= 1 for i in legs)
            if ok and control == "bid_price":
                ok = f[j] >= sum(res["bid_price"][i] for i in legs) - TOL * f[j]
            elif ok and control == "table":
                rows = res["bid_price_table"][t - res.period]
                ok = f[j] >= sum(rows[x[i], i] for i in legs) - TOL * f[j]
            elif ok and control == "nested":
                lim, bkt = res["booking_limit"], res["product_bucket"]
                for i in legs:
                    b = int(bkt[i, j])
                    taken = sum(v for (ii, bb), v in sold.items() if ii == i and bb >= b)
                    ok = ok and b >= 0 and taken + 1 <= lim[i, b]
            elif ok and control == "decisions":
                s = sum(x[i] * int(res.policy.strides[i]) for i in range(m))
                byte = int(res.policy.bits[t - res.policy.t0, s, j // 8])
                ok = bool((byte >> (j % 8)) & 1)
            if ok:
                for i in legs:
                    x[i] -= 1
                    if control == "nested":
                        key = (i, int(res["product_bucket"][i, j]))
                        sold[key] = sold.get(key, 0) + 1
                revenue[k] += f[j]
                accepted[k, j] += 1
                again = every_sale
            else:
                rejected[k, j] += 1
        seats_left[k] = x
    return revenue, accepted, rejected, seats_left, solves


def bernstein_halfwidth(values: np.ndarray, value_range: float, delta: float = 1e-6) -> float:
    """Half-width of a two-sided confidence interval for the mean of i.i.d. values in an interval
    of length ``value_range``, valid with probability >= 1 - delta at any sample size: the
    empirical Bernstein bound of Maurer & Pontil (2009), "Empirical Bernstein bounds and sample
    variance penalization", COLT, Theorem 4 (applied to each side with delta / 2).

    Hypothesis checks many random cases, so a 3-SE rule would fail by chance somewhere (and a
    sample with no spread has SE 0); this bound holds for every case at once with tiny risk.
    """
    v = np.asarray(values, dtype=np.float64)
    n = v.size
    log_term = np.log(4.0 / delta)
    return float(np.sqrt(2.0 * v.var(ddof=1) * log_term / n)
                 + 7.0 * value_range * log_term / (3.0 * (n - 1)))


@contextmanager
def interpreted_kernels():
    """Run the simulator's kernels as plain Python: every compiled function of the replay kernel,
    the demand kinds' kernels and the controls is swapped for its ``py_func`` (so the loop's
    calls to its helpers are interpreted too; the extension points dispatch in Python)."""
    import sys

    import rmkit.controls
    import rmkit.kernels.choice_demand  # noqa: F401
    import rmkit.kernels.independent_demand  # noqa: F401
    import rmkit.kernels.replay

    rmkit.controls.load_controls()
    modules = [m for name, m in sys.modules.items()
               if name.startswith(("rmkit.kernels.", "rmkit.controls.")) and m is not None]
    swapped = []
    for module in modules:
        for name, fn in list(vars(module).items()):
            if hasattr(fn, "py_func"):
                swapped.append((module, name, fn))
                setattr(module, name, fn.py_func)
    try:
        yield
    finally:
        for module, name, fn in swapped:
            setattr(module, name, fn)


def kernel_both_ways(args_before_book: tuple, make_book, make_trace, strides: np.ndarray,
                     loop: str = "replay_paths") -> tuple[list, list]:
    """Books (and traces) after the replay loop ``loop`` of :mod:`rmkit.kernels.replay` ran
    compiled and interpreted on the same inputs (``make_book()`` gives fresh seats, revenue,
    accepted, lost, memo, next; ``make_trace()`` a fresh trace array)."""
    import rmkit.kernels.replay as kernels

    compiled, trace = make_book(), make_trace()
    getattr(kernels, loop)(*args_before_book, tuple(compiled), trace, strides)
    plain, plain_trace = make_book(), make_trace()
    with interpreted_kernels():
        getattr(kernels, loop)(*args_before_book, tuple(plain), plain_trace, strides)
    return [*compiled, trace], [*plain, plain_trace]


def state_distribution(network: Network, demand: DemandModel, result: SolveResult) -> np.ndarray:
    """``(T, S)``: P(flat state at the start of period t) under ``result.policy``, by a plain
    forward recursion over dicts (probability mass pushed period by period, no sampling)."""
    a, p = network.incidence, demand.probabilities
    strides = grid_strides(network)
    n_states = network.state_space_size
    out = np.zeros((demand.n_periods, n_states))
    now = {tuple(int(c) for c in network.capacities): 1.0}
    for t in range(demand.n_periods):
        nxt: dict = {}
        for x, mass in now.items():
            s = int(np.dot(x, strides))
            out[t, s] += mass
            stay = mass * (1.0 - p[t].sum())
            for j in range(network.n_products):
                y = tuple(int(v) for v in np.subtract(x, a[:, j]))
                offered = (result.policy.bits[t, s, j // 8] >> (j % 8)) & 1
                if min(y) >= 0 and offered:
                    nxt[y] = nxt.get(y, 0.0) + mass * p[t, j]
                else:
                    stay += mass * p[t, j]
            nxt[x] = nxt.get(x, 0.0) + stay
        now = nxt
    return out
