"""The choice-based deterministic LP (CDLP) by column generation, and its pricing problems.

CDLP (Gallego, Iyengar, Phillips & Dubey 2004; Liu & van Ryzin 2008, sec. 3). With offer sets S,
expected revenue per period ``R(S) = sum_j f_j P_j(S)`` and expected use of leg i per period
``Q_i(S) = sum_j A_ij P_j(S)``::

    max sum_S R(S) h(S)   s.t.  sum_S Q(S) h(S) <= x,   sum_S h(S) <= T,   h >= 0,

h(S) being the number of periods S is offered. Arrival probabilities that change over time are
handled by *epochs*, the runs of periods that share one row of arrival probabilities: each epoch
e has its own sets, columns ``h_e(S)`` and time row ``sum_S h_e(S) <= T_e`` (with constant
arrivals this is the program above). CDLP bounds the optimal expected revenue from above.

Column generation (Bront, Mendez-Diaz & Vulcano 2009, sec. 4): the restricted master LP over
the sets found so far gives leg duals pi and time duals sigma; set S of epoch e prices out at

    sum_j P_ej(S) (f_j - sum_i A_ij pi_i) - sigma_e,

and the pricing problem is its maximum over S. It is solved

* ``"mip"``: exactly, as the mixed-integer linear program of Bront et al. (2009, sec. 4.1)
  with HiGHS (binary y_j = j offered, x_l = 1 / (v_l0 + sum_k v_lk y_k), z_lj = x_l y_j
  linearised by McCormick bounds). The problem separates over components; in each, the greedy
  set is kept when it reaches the bound ``sum_l lambda_l max_S R_l(S)`` (each segment alone is
  solved by a revenue-ordered set), which certifies it, and the MIP is solved otherwise;
* ``"greedy"``: the greedy heuristic of Bront et al. (2009, sec. 4.2) alone (add the product
  that raises the reduced cost most while any does); the value is then not certified;
* ``"enumerate"``: exactly, by searching every subset of every component (small components);
* ``"auto"`` (the default): ``"enumerate"`` on components of at most :data:`AUTO_ENUMERATE`
  products, ``"mip"`` on larger ones; both exact, and enumeration is far cheaper on the small
  components of most instances (many epochs x iterations of MIPs otherwise).

``columns="all"`` instead solves the LP over every offer set at once (a check on small cases).
Products with ``f_j - pi A_j <= 0`` are never in a best set (:mod:`.offer_sets`), so they are
left out of the pricing problems.
"""

from __future__ import annotations

import itertools
from dataclasses import dataclass, field

import numpy as np

from rmkit.methods.shared.highs_rows import Row, solve_rows
from rmkit.methods.shared.network_lp import map_status, quiet_highs
from rmkit.methods.shared.offer_sets import components, set_probabilities
from rmkit.model.choice import ChoiceDemand, purchase_matrix
from rmkit.model.network import Network

PRICING_CHOICES = ("auto", "mip", "greedy", "enumerate")
#: ``pricing="auto"`` enumerates the subsets of components up to this size, else uses the MIP.
AUTO_ENUMERATE = 10
COLUMN_CHOICES = ("generate", "all")
#: A set enters the master when its reduced cost exceeds this times (1 + the largest fare).
REDUCED_COST_TOL = 1e-9
#: Most products for ``columns="all"`` (2**n sets per epoch).
MAX_ALL_PRODUCTS = 16


@dataclass
class CDLPSolution:
    value: float
    leg_duals: np.ndarray  # (m,)
    time_duals: np.ndarray  # (E,)
    sets: np.ndarray  # bool (K, n): the columns with h > 0
    hours: np.ndarray  # (K,): periods each is offered
    epochs: np.ndarray  # (K,) int: the epoch of each
    epoch_of_period: np.ndarray  # (T - t0,)
    status: str
    message: str
    iterations: int
    n_columns: int
    sales: np.ndarray = field(default_factory=lambda: np.zeros(0))  # (K,) sales per period


class _Master:
    """The restricted master LP in HiGHS: m leg rows, E time rows; columns added as found."""

    def __init__(self, capacity: np.ndarray, lengths: np.ndarray) -> None:
        import highspy

        self.h = quiet_highs()
        self.m, self.n_epochs = capacity.size, lengths.size
        inf = highspy.kHighsInf
        upper = np.concatenate([capacity.astype(np.float64), lengths.astype(np.float64)])
        self.h.addRows(upper.size, np.full(upper.size, -inf), upper, 0,
                       np.zeros(0, np.int32), np.zeros(0, np.int32), np.zeros(0))
        self.h.changeObjectiveSense(highspy.ObjSense.kMaximize)
        self.columns: list[tuple[int, np.ndarray, float]] = []

    def add(self, epoch: int, offered: np.ndarray, revenue: float, use: np.ndarray,
            sales: float) -> None:
        import highspy

        rows = np.concatenate([np.flatnonzero(use > 0), [self.m + epoch]]).astype(np.int32)
        vals = np.concatenate([use[use > 0], [1.0]])
        self.h.addCol(float(revenue), 0.0, highspy.kHighsInf, rows.size, rows, vals)
        self.columns.append((epoch, offered, float(sales)))

    def solve(self) -> tuple[str, str, float, np.ndarray, np.ndarray]:
        self.h.run()
        status = map_status(self.h.getModelStatus())
        sol = self.h.getSolution()
        duals = np.maximum(np.array(sol.row_dual), 0.0)  # >= 0 up to rounding
        value = float(self.h.getInfoValue("objective_function_value")[1])
        detail = self.h.modelStatusToString(self.h.getModelStatus())
        return status, detail, value, duals, np.array(sol.col_value)


def _epochs(demand: ChoiceDemand, period: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``(rows (E, L), lengths (E,), epoch of each period)`` from ``period`` on."""
    lam = demand.arrival[period:]
    rows, epoch = np.unique(lam, axis=0, return_inverse=True)
    epoch = epoch.reshape(-1)
    return rows, np.bincount(epoch, minlength=rows.shape[0]).astype(np.float64), epoch


def solve_cdlp(network: Network, demand: ChoiceDemand, period: int, capacity: np.ndarray, *,
               pricing: str = "auto", columns: str = "generate", max_iterations: int = 1000
               ) -> CDLPSolution:
    """CDLP from ``period`` with ``capacity`` seats left (see the module docstring)."""
    rows, lengths, epoch = _epochs(demand, period)
    a, f = network.incidence.astype(np.float64), network.fares
    master = _Master(np.asarray(capacity), lengths)
    n = network.n_products

    def add(epochs: np.ndarray, offered: np.ndarray) -> None:
        probs = set_probabilities(demand, offered, rows[epochs])
        for e, s, p in zip(epochs, offered, probs, strict=True):
            master.add(int(e), s, float(p @ f), a @ p, float(p.sum()))

    if columns == "all":
        every = np.array(list(itertools.product((False, True), repeat=n))[1:], dtype=bool)
        for e in range(rows.shape[0]):
            add(np.full(every.shape[0], e), every)
        status, detail, value, duals, h = master.solve()
        iterations = 1
    else:
        add(np.arange(rows.shape[0]), np.ones((rows.shape[0], n), dtype=bool))
        pricer = _Pricer(network, demand, rows, pricing)
        tol = REDUCED_COST_TOL * (1.0 + float(f.max(initial=0.0)))
        iterations = 0
        while True:
            status, detail, value, duals, h = master.solve()
            iterations += 1
            if status != "optimal" or iterations >= max_iterations:
                if status == "optimal":
                    status, detail = "iteration_limit", f"{max_iterations} iterations"
                break
            r = f - duals[: network.n_legs] @ a
            offered, gains = pricer.best_all(r)
            better = np.flatnonzero(gains - duals[network.n_legs:] > tol)
            add(better, offered[better])
            if better.size == 0:
                break
    cols = master.columns
    used = np.flatnonzero(h > 1e-12) if status == "optimal" else np.zeros(0, dtype=np.int64)
    message = "" if status == "optimal" else f"CDLP master {status} ({detail})"
    if pricing == "greedy" and columns == "generate":
        message = ("pricing='greedy': no improving set found by the greedy heuristic, which does "
                   "not prove optimality; the value may fall short of the CDLP optimum")
    return CDLPSolution(
        value=value if status == "optimal" else float("nan"),
        leg_duals=duals[: network.n_legs],
        time_duals=duals[network.n_legs:],
        sets=np.array([cols[k][1] for k in used], dtype=bool).reshape(-1, n),
        hours=h[used],
        epochs=np.array([cols[k][0] for k in used], dtype=np.int64),
        epoch_of_period=epoch,
        status=status,
        message=message,
        iterations=iterations,
        n_columns=len(cols),
        sales=np.array([cols[k][2] for k in used]),
    )


class _Pricer:
    """The pricing problem of every epoch, ``max_S sum_j P_ej(S) r_j``, component by component
    (the objective separates over components, :mod:`.offer_sets`). Enumerated components are
    priced for all epochs at once from tables of every subset's sale probabilities."""

    def __init__(self, network: Network, demand: ChoiceDemand, rows: np.ndarray, how: str):
        self.demand, self.rows, self.how = demand, rows, how
        self.w, self.v0 = demand.weight_matrix(), demand.no_purchase
        self.n = network.n_products
        self.groups = [np.array(g) for g in components(demand)]
        self.segments = [np.flatnonzero(self.w[:, g].sum(axis=1) > 0) for g in self.groups]
        self.tables = [self._table(g, segs) if self._enumerated(g) else None
                       for g, segs in zip(self.groups, self.segments, strict=True)]

    def _enumerated(self, g: np.ndarray) -> bool:
        return self.how == "enumerate" or (self.how == "auto" and g.size <= AUTO_ENUMERATE)

    def _table(self, g: np.ndarray, segs: np.ndarray) -> np.ndarray:
        """``(E, 2**n_c, n_c)``: sale probability per period of each product of the component
        for every subset (bits over the component's products) in every epoch."""
        subs = ((np.arange(2**g.size)[:, None] >> np.arange(g.size)[None, :]) & 1) > 0
        out = np.zeros((self.rows.shape[0],) + subs.shape)
        for l in segs:
            share = purchase_matrix(self.w[l][g][None, :] * subs, np.full(subs.shape[0],
                                                                         self.v0[l]), None)
            out += self.rows[:, l][:, None, None] * share[None, :, :]
        return out

    def best_all(self, r: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """``(offered (E, n), gain (E,))``: the best set of every epoch and what it earns."""
        n_epochs = self.rows.shape[0]
        offered = np.zeros((n_epochs, self.n), dtype=bool)
        for g, segs, table in zip(self.groups, self.segments, self.tables, strict=True):
            if table is not None:
                offered[:, g] = _best_subsets(table, r[g])
                continue
            rc = np.zeros(self.n)
            rc[g] = r[g]
            if segs.size == 1:  # one segment: a revenue-ordered set is best, whatever the epoch
                offered[:, revenue_ordered(self.w[segs[0]], self.v0[segs[0]], rc)] = True
                continue
            for e in range(n_epochs):
                offered[e] |= self._search(self.rows[e][segs], self.w[segs], self.v0[segs], rc)
        return offered, set_probabilities(self.demand, offered, self.rows) @ r

    def _search(self, lam: np.ndarray, w: np.ndarray, v0: np.ndarray, r: np.ndarray
                ) -> np.ndarray:
        pick, value = greedy_set(w, v0, lam, r)
        if self.how != "greedy":
            bound = sum(lam[q] * single_segment_best(w[q], v0[q], r) for q in range(lam.size))
            if bound - value > REDUCED_COST_TOL * (1.0 + abs(bound)):
                # the greedy set may not be optimal here: solve the component's MIP
                exact = mip_set(w, v0, lam, r)
                if _segment_gain(w, v0, lam, r, exact) > value:
                    pick = exact
        return pick


def _best_subsets(table: np.ndarray, r: np.ndarray) -> np.ndarray:
    """``(E, n_c)``: per epoch, the subset of the products with r > 0 earning most (ties: the
    first in ascending order of subset bits)."""
    subs = np.arange(table.shape[1])
    allowed = int(sum(1 << q for q in range(r.size) if r[q] > 0))
    value = np.where(((subs & ~allowed) == 0)[None, :], table @ np.maximum(r, 0.0), -np.inf)
    best = np.argmax(value, axis=1)
    return ((best[:, None] >> np.arange(r.size)[None, :]) & 1) > 0


def _segment_gain(w: np.ndarray, v0: np.ndarray, lam: np.ndarray, r: np.ndarray,
                  offered: np.ndarray) -> float:
    return float(lam @ purchase_matrix(w, v0, offered) @ r)


def _nested(w: np.ndarray, v0: float, r: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """One segment's products with r > 0 by r descending, and what each nested set earns."""
    cand = np.flatnonzero((w > 0) & (r > 0))
    order = cand[np.argsort(-r[cand], kind="stable")]
    return order, np.cumsum(w[order] * r[order]) / (v0 + np.cumsum(w[order]))


def single_segment_best(w: np.ndarray, v0: float, r: np.ndarray) -> float:
    """``max_S sum_j P_j(S) r_j`` for ONE MNL segment: some revenue-ordered set (the products
    with the k highest r_j) is optimal (Talluri & van Ryzin 2004, sec. 7.2.2), so k runs over
    the products with r_j > 0. Summed over a component's segments it bounds the component's
    pricing problem from above, with equality when the segments agree."""
    _, earn = _nested(w, v0, r)
    return float(earn.max(initial=0.0))


def revenue_ordered(w: np.ndarray, v0: float, r: np.ndarray) -> np.ndarray:
    """The products of ONE segment's best set (the revenue-ordered set attaining the max)."""
    order, earn = _nested(w, v0, r)
    return order[: int(np.argmax(earn)) + 1] if earn.size else order


def greedy_set(w: np.ndarray, v0: np.ndarray, lam: np.ndarray, r: np.ndarray
               ) -> tuple[np.ndarray, float]:
    """Greedy heuristic (Bront et al. 2009, sec. 4.2): from the empty set, add the product that
    raises ``sum_l lam_l sum_j P_lj(S) r_j`` most, while one does."""
    n = r.size
    offered = np.zeros(n, dtype=bool)
    best = 0.0
    segs = lam > 0
    ws, lams, v0s = w[segs], lam[segs], v0[segs]
    num = np.zeros(ws.shape[0])
    den = v0s.copy()
    candidates = np.flatnonzero(r > 0)
    while True:
        trial_num = num[:, None] + ws[:, candidates] * r[candidates][None, :]
        trial_den = den[:, None] + ws[:, candidates]
        vals = (lams[:, None] * np.divide(trial_num, trial_den, out=np.zeros_like(trial_num),
                                          where=trial_den > 0)).sum(axis=0)
        vals[offered[candidates]] = -np.inf
        if vals.size == 0 or vals.max() <= best * (1 + 1e-12) + 1e-12:
            return offered, best
        k = int(np.argmax(vals))
        j = candidates[k]
        offered[j] = True
        best = float(vals[k])
        num += ws[:, j] * r[j]
        den += ws[:, j]


def mip_set(w: np.ndarray, v0: np.ndarray, lam: np.ndarray, r: np.ndarray) -> np.ndarray:
    """The pricing MIP of Bront, Mendez-Diaz & Vulcano (2009, sec. 4.1), solved by HiGHS.

    Variables: y_j in {0, 1} for the products with r_j > 0; per segment l (lam_l > 0 and some
    candidate considered) x_l = 1 / (v_l0 + sum v_lk y_k) and z_lj = x_l y_j. Maximise
    ``sum_l lam_l sum_j r_j v_lj z_lj`` subject to ``v_l0 x_l + sum_j v_lj z_lj = o_l`` and the
    McCormick bounds ``z_lj <= x_l``, ``z_lj <= U_l y_j``, ``z_lj >= x_l - U_l (1 - y_j)``, with
    ``U_l = 1 / v_l0`` (or ``1 / min v_lj`` when ``v_l0 = 0``). ``o_l = 1`` when ``v_l0 > 0``;
    otherwise o_l is binary, ``y_j <= o_l <= sum_j y_j`` (nothing offered, nothing bought).
    """
    import highspy

    cand = np.flatnonzero(r > 0)
    n = r.size
    out = np.zeros(n, dtype=bool)
    segs = [l for l in range(w.shape[0]) if lam[l] > 0 and np.any(w[l, cand] > 0)]
    if cand.size == 0 or not segs:
        return out
    inf = highspy.kHighsInf
    cost, lower, upper, integer = [], [], [], []
    rows: list[Row] = []

    def var(c: float, lo: float, hi: float, is_int: bool) -> int:
        cost.append(c)
        lower.append(lo)
        upper.append(hi)
        integer.append(is_int)
        return len(cost) - 1

    y = {int(j): var(0.0, 0.0, 1.0, True) for j in cand}
    for l in segs:
        members = [int(j) for j in cand if w[l, j] > 0]
        u = 1.0 / v0[l] if v0[l] > 0 else 1.0 / float(w[l, members].min())
        x = var(0.0, 0.0, u, False)
        if v0[l] > 0:
            o_idx, o_val = [], []
            rhs = 1.0
        else:
            o = var(0.0, 0.0, 1.0, True)
            o_idx, o_val, rhs = [o], [-1.0], 0.0
            rows.append(([o] + [y[j] for j in members], [1.0] + [-1.0] * len(members), -inf, 0.0))
            for j in members:
                rows.append(([y[j], o], [1.0, -1.0], -inf, 0.0))
        idx, val = [x] + o_idx, [float(v0[l])] + o_val
        for j in members:
            z = var(float(lam[l] * r[j] * w[l, j]), 0.0, u, False)
            idx.append(z)
            val.append(float(w[l, j]))
            rows.append(([z, x], [1.0, -1.0], -inf, 0.0))
            rows.append(([z, y[j]], [1.0, -u], -inf, 0.0))
            rows.append(([x, z, y[j]], [1.0, -1.0, u], -inf, u))
        rows.append((idx, val, rhs, rhs))
    values = solve_rows(cost, lower, upper, rows, integer=integer, gap=1e-9).columns
    for j, k in y.items():
        out[j] = values[k] > 0.5
    return out


def schedule(sol: CDLPSolution) -> np.ndarray:
    """``(T - t0,)`` index of the set offered in each period (``len(sol.sets)``: none).

    Within each epoch the sets are offered one after the other for their ``h(S)`` periods, in
    decreasing order of expected sales per period (the most open sets first, as fare classes
    close over a booking horizon), then nothing for the epoch's idle time; period i of an epoch
    gets the set whose stretch of time covers ``i + 1/2``.
    """
    out = np.full(sol.epoch_of_period.size, len(sol.sets), dtype=np.int64)
    for e in np.unique(sol.epoch_of_period):
        periods = np.flatnonzero(sol.epoch_of_period == e)
        mine = np.flatnonzero(sol.epochs == e)
        mine = mine[np.argsort(-sol.sales[mine], kind="stable")]
        ends = np.cumsum(sol.hours[mine])
        mid = np.arange(periods.size) + 0.5
        k = np.searchsorted(ends, mid, side="right")  # first stretch ending after mid
        starts = ends - sol.hours[mine]
        inside = (k < mine.size)
        inside[inside] &= mid[inside] >= starts[k[inside]]
        out[periods[inside]] = mine[k[inside]]
    return out
