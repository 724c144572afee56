"""DAVN: displacement-adjusted virtual nesting (Smith, Leimkuhler & Darrow 1992; Williamson 1992).

1. Net fares. On leg i product j counts its network contribution
   ``f_j - sum_{k in legs(j), k != i} pi_k``, the fare less the displacement cost of its other
   legs, with ``pi`` the leg bid prices of a network method at the solve state (DLP duals by
   default, ``displacement_method``), optionally iterated with DAVN's own bid prices
   (``displacement_iterations``; :mod:`rmkit.methods.shared.fare_basis`). A product whose net fare on a leg is
   ``<= 0`` is closed there (bucket -1).
2. Virtual buckets. On each leg the distinct positive net fares, sorted high to low, are grouped
   into at most ``buckets`` contiguous virtual buckets that minimise the demand-weighted sum of
   squared deviations of the net fares from their bucket's mean: the exact one-dimensional
   k-means optimum (W. D. Fisher 1958, dynamic programming over the sorted fares; see
   :func:`rmkit.methods.shared.leg_heuristics.group_fares`). Equal net fares share a bucket; a leg with
   no more distinct net fares than buckets gives each its own. A bucket's fare is the demand-weighted
   mean net fare of its members, and its demand the sum of theirs (demand to come from the solve
   period; Poisson or normal as in :mod:`rmkit.methods.emsrb`).
3. EMSR-b (Belobaba 1992) over the buckets gives the protection levels for the seats left.

Outputs follow the nested booking-limit convention of :mod:`rmkit.methods.emsrb` exactly:
bucket 0 highest; a request for j on leg i in bucket ``b = bucket[i, j]`` is accepted iff the
seats sold from the solve state into buckets b and lower stay within ``booking_limit[i, b]``,
with ``booking_limit[i, 0] = x_i`` and ``booking_limit[i, b] = x_i - protection_level[i, b-1]``
(``protection_level[i, b]``: seats protected for buckets 0..b). ``bid_price`` is the equivalent
bid-price view (EMSR-b value of the ``x_i``-th seat over the buckets), ``net_fare`` the net
fares, ``value`` the leg-level estimate described in :mod:`rmkit.methods.emsrb`.

References: B. C. Smith, J. F. Leimkuhler and R. M. Darrow (1992), "Yield management at American
Airlines", Interfaces 22(1):8-31; E. L. Williamson (1992), *Airline Network Seat Inventory
Control: Methodologies and Revenue Impacts*, PhD thesis, MIT.
"""

from __future__ import annotations

from typing import Any

from rmkit.methods.base import Param, Problem, Search, SolveOutput, Solver, Tags, positive_int, register
from rmkit.methods.emsrb import DISPLACEMENT_PARAMS, LAW_PARAM, solve_nested


@register
class Davn(Solver):
    """Displacement-adjusted virtual nesting (Smith, Leimkuhler & Darrow 1992; Williamson 1992)."""

    name = "davn"
    tags = Tags(heuristic=True, control="nested", needs_displacement=True)
    citation = (
        "B. C. Smith, J. F. Leimkuhler and R. M. Darrow (1992), Yield management at American "
        "Airlines, Interfaces 22(1):8-31; E. L. Williamson (1992), Airline Network Seat "
        "Inventory Control: Methodologies and Revenue Impacts, PhD thesis, MIT"
    )
    params = {
        "buckets": Param(6, "an integer >= 1", positive_int,
                         Search("integer", "number of virtual buckets per leg")),
        **DISPLACEMENT_PARAMS,
        "law": LAW_PARAM,
    }

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        k = params["buckets"]
        return solve_nested(problem, params, seed, "network", k, k)
