"""Independent checks of what methods and simulations return, whoever produced it.

Every allocation a method returns is re-checked against ``A y <= x, y >= 0``, and every simulated
path against the network: seats sold on each leg never exceed its capacity, seats left equal
capacity minus the seats the accepted products use, and revenue equals the fares of the accepted
products. Each check returns ``"ok"`` or one line saying what failed (the ``check`` variable of
:func:`rmkit.workflows.compare.compare`).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np

from rmkit.model.network import Network
from rmkit.results import SolveResult

if TYPE_CHECKING:  # pragma: no cover
    import xarray as xr

#: Relative slack when re-checking ``A y <= x`` on an LP allocation (solver rounding).
ALLOCATION_TOLERANCE = 1e-7


def check_allocation(network: Network, result: SolveResult) -> str:
    """``ok`` when the result's allocation (if any) satisfies ``A y <= x, y >= 0``."""
    if "allocation" not in result:
        return "ok"
    y = np.asarray(result["allocation"], dtype=np.float64)
    x = np.asarray(result.capacity, dtype=np.float64)
    used = network.incidence @ y
    slack = ALLOCATION_TOLERANCE * (1.0 + x)
    if not np.all(np.isfinite(y)):
        return "allocation has non-finite entries"
    if np.any(y < -ALLOCATION_TOLERANCE):
        j = int(np.argmin(y))
        return f"allocation of product {network.product_ids[j]!r} is {y[j]:.6g} < 0"
    over = np.flatnonzero(used > x + slack)
    if over.size:
        i = int(over[0])
        return (f"allocation uses {used[i]:.6g} seats of leg {network.leg_ids[i]!r}, which has "
                f"{x[i]:.0f}")
    return "ok"


def check_paths(network: Network, sim: xr.Dataset) -> str:
    """``ok`` when every simulated path respects capacity and its books add up."""
    accepted = np.asarray(sim["accepted"].values, dtype=np.int64)
    used = accepted @ network.incidence.T  # (path, leg)
    caps = np.asarray(network.capacities, dtype=np.int64)
    over = np.argwhere(used > caps[None, :])
    if over.size:
        k, i = (int(v) for v in over[0])
        return f"path {k} sold {used[k, i]} seats on leg {network.leg_ids[i]!r} (capacity {caps[i]})"
    left = np.asarray(sim["seats_left"].values, dtype=np.int64)
    bad = np.argwhere(left != caps[None, :] - used)
    if bad.size:
        k, i = (int(v) for v in bad[0])
        return f"path {k}: seats left on leg {network.leg_ids[i]!r} disagree with the sales"
    revenue = accepted @ network.fares
    got = np.asarray(sim["revenue"].values, dtype=np.float64)
    wrong = np.flatnonzero(~np.isclose(got, revenue, rtol=1e-9, atol=1e-6))
    if wrong.size:
        k = int(wrong[0])
        return f"path {k}: revenue {got[k]:.6g} differs from the fares sold {revenue[k]:.6g}"
    return "ok"
