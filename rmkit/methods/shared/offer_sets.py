"""Offer sets of choice demand, tabulated once for the choice methods and controls.

Under MNL choice (:mod:`rmkit.model.choice`) a customer's purchase depends only on the offered
products she considers, so the products split into *components*: two products are in the same
component when some chain of segments considers them both. The expected gain of offering S in a
period with net revenues r (fare less the displacement of the seats),

    sum_j P_j(S) r_j = sum_c sum_{j in S_c} P_j(S_c) r_j,

is a sum over components of terms that depend only on the component's part S_c, so the best set
is found component by component (Liu & van Ryzin 2008, sec. 3; with one segment per product
every component is a single product). :class:`OfferSets` tabulates, for every component c, every
subset ``sub`` of its products and every *epoch* (a distinct row of arrival probabilities):

    prob[e, set_ptr[c] + q * 2**n_c + sub] = P_j(sub) for the q-th product j of c,

the chance of a sale of j per period of epoch e when ``sub`` is offered (0 when j is not in
``sub``). The layout puts the subsets of one product next to each other, so the kernels evaluate
every subset of a component at once in a vectorised loop (:mod:`rmkit.kernels.offer_sets`).

A product with a negative net revenue is never in a best set: dropping the worst one raises
every segment's average (which is at least that revenue). So only subsets of the products with
``r_j >= 0`` are searched; ties keep the largest such set (products with ``r_j = 0`` stay on
offer, as the independent-demand rule accepts ties).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from rmkit.errors import InputError
from rmkit.model.choice import ChoiceDemand, purchase_matrix

#: Largest component whose subsets are tabulated (2**16 subsets).
MAX_COMPONENT = 16


@dataclass(frozen=True, eq=False)
class OfferSets:
    """Components, their subsets' sale probabilities per epoch, and each period's epoch."""

    comp_ptr: np.ndarray  # int64 (C + 1,)
    comp_product: np.ndarray  # int64: products of component c at comp_ptr[c] .. comp_ptr[c+1]-1
    set_ptr: np.ndarray  # int64 (C + 1,): offset of component c in a row of prob
    prob: np.ndarray  # float64 (E, set_ptr[-1])
    epoch: np.ndarray  # int64 (T,): epoch of each period
    product_comp: np.ndarray  # int64 (n,): component of product j, -1 when nobody considers it
    product_pos: np.ndarray  # int64 (n,): position of j within its component

    @property
    def n_components(self) -> int:
        return int(self.comp_ptr.size - 1)

    @property
    def sizes(self) -> np.ndarray:
        return np.diff(self.comp_ptr)

    @property
    def n_sets(self) -> int:
        """Subsets searched per state: ``sum_c 2**n_c``."""
        return int(sum(2 ** int(s) for s in self.sizes))

    def arrays(self) -> tuple[np.ndarray, ...]:
        """What the kernels read: ``(comp_ptr, comp_product, set_ptr, prob, epoch)``."""
        return (self.comp_ptr, self.comp_product, self.set_ptr, self.prob, self.epoch)

    def subset_bits(self, c: int, sub: int) -> np.ndarray:
        """The products of subset ``sub`` of component c."""
        members = self.comp_product[self.comp_ptr[c]:self.comp_ptr[c + 1]]
        return members[[(sub >> q) & 1 == 1 for q in range(members.size)]]


def components(demand: ChoiceDemand) -> list[list[int]]:
    """Products grouped into components (ascending within, ordered by their smallest product)."""
    parent = list(range(demand.n_products))

    def root(j: int) -> int:
        while parent[j] != j:
            parent[j] = parent[parent[j]]
            j = parent[j]
        return j

    considered = set()
    for c in demand.consider:
        considered.update(c)
        for j in c[1:]:
            a, b = root(c[0]), root(j)
            if a != b:
                parent[max(a, b)] = min(a, b)
    groups: dict[int, list[int]] = {}
    for j in sorted(considered):
        groups.setdefault(root(j), []).append(j)
    return sorted(groups.values(), key=lambda g: g[0])


def component_refusal(demand: ChoiceDemand, limit: int = MAX_COMPONENT) -> str | None:
    """Why the subsets cannot be tabulated (a component too large), else ``None``."""
    big = max((len(g) for g in components(demand)), default=0)
    if big > limit:
        return (f"{big} products are linked by overlapping consideration sets, above the "
                f"{limit} whose 2**n offer sets are enumerated; split the segments")
    return None


def offer_sets(demand: ChoiceDemand, period: int = 0, limit: int = MAX_COMPONENT) -> OfferSets:
    """Tabulate the offer sets of ``demand`` for periods ``period .. T-1``."""
    reason = component_refusal(demand, limit)
    if reason is not None:
        raise InputError(f"demand: {reason}")
    groups = components(demand)
    lam = np.ascontiguousarray(demand.arrival[period:])
    rows, epoch = np.unique(lam, axis=0, return_inverse=True)
    w, v0 = demand.weight_matrix(), demand.no_purchase
    n = demand.n_products
    product_comp = np.full(n, -1, dtype=np.int64)
    product_pos = np.zeros(n, dtype=np.int64)
    set_ptr = [0]
    blocks = []
    for c, members in enumerate(groups):
        nc = len(members)
        product_comp[members] = c
        product_pos[members] = np.arange(nc)
        segs = np.flatnonzero(w[:, members].sum(axis=1) > 0)
        subs = (np.arange(2**nc)[:, None] >> np.arange(nc)[None, :]) & 1  # (2^nc, nc)
        share = np.empty((segs.size, nc, 2**nc))
        for q, l in enumerate(segs):
            full = np.zeros((2**nc, n), dtype=bool)
            full[:, members] = subs.astype(bool)
            # every subset at once: purchase_matrix's rows are the subsets here
            p = _subset_shares(w[l], v0[l], full)
            share[q] = p[:, members].T
        blocks.append(rows[:, segs] @ share.reshape(segs.size, -1))
        set_ptr.append(set_ptr[-1] + nc * 2**nc)
    prob = (np.concatenate(blocks, axis=1) if blocks else np.zeros((rows.shape[0], 0)))
    ptr = np.zeros(len(groups) + 1, dtype=np.int64)
    ptr[1:] = np.cumsum([len(g) for g in groups])
    return OfferSets(
        comp_ptr=ptr,
        comp_product=np.array([j for g in groups for j in g], dtype=np.int64),
        set_ptr=np.array(set_ptr, dtype=np.int64),
        prob=np.ascontiguousarray(prob),
        epoch=epoch.reshape(-1).astype(np.int64),
        product_comp=product_comp,
        product_pos=product_pos,
    )


def _subset_shares(w_l: np.ndarray, v0_l: float, offered_rows: np.ndarray) -> np.ndarray:
    """``(K, n)``: one segment's purchase probabilities for K offered sets (rows)."""
    return purchase_matrix(w_l[None, :] * offered_rows, np.full(offered_rows.shape[0], v0_l),
                           None)


def set_probabilities(demand: ChoiceDemand, sets: np.ndarray, arrival: np.ndarray
                      ) -> np.ndarray:
    """``(K, n)``: sale probability per period of each product for K offered sets (bool rows),
    set k facing the segments' arrival probabilities ``arrival[k]`` (or one ``(L,)`` row for
    all)."""
    w, v0 = demand.weight_matrix(), demand.no_purchase
    offered = np.asarray(sets, dtype=bool)
    ws = w[None, :, :] * offered[:, None, :]  # (K, L, n)
    denom = v0[None, :] + ws.sum(axis=2)
    share = ws / np.where(denom > 0, denom, 1.0)[:, :, None]
    lam = np.broadcast_to(np.asarray(arrival, dtype=np.float64), (offered.shape[0], w.shape[0]))
    return np.einsum("kl,kln->kn", lam, share)
