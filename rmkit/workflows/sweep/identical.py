"""Policies of a sweep that behaved identically: the same revenue on every path of a scenario.

Two policies with identical per-path revenue on common random numbers accepted the same
requests. A frequent cause: static bid prices at or below the cheapest fares. A bid-price
control sells a product when its fare is at least the sum of its legs' bid prices (ties are
accepted), so such a policy accepts every request it has seats for, exactly as first come,
first served does.
"""

from __future__ import annotations

from collections.abc import Iterator

import numpy as np

WHY = ("identical revenue on every path: the policies accepted the same requests. Often the "
       "bid prices are at or below the cheapest fares, and ties are accepted (a product sells "
       "when its fare >= the sum of its legs' bid prices), so the policy sells like fcfs")


def identical_policies(ds) -> Iterator[tuple[str, str, str]]:
    """``(scenario, policy a, policy b)`` whose per-path revenue agrees to the cent on every seed
    (``ds`` from ``open_sweep(store, paths=True)``)."""
    if "revenue" not in ds:
        return
    methods = [str(m) for m in ds.method.values]
    policies = [q for q, m in enumerate(ds["measure"].values) if str(m) == "policy"]
    for i, scen in enumerate(ds.scenario.values):
        for a_pos, a in enumerate(policies):
            for b in policies[a_pos + 1:]:
                ra, rb = ds["revenue"].values[i, a], ds["revenue"].values[i, b]
                done = np.isfinite(ra).any(axis=-1) & np.isfinite(rb).any(axis=-1)
                if done.any() and np.allclose(ra[done], rb[done], rtol=0, atol=0.005,
                                              equal_nan=True):
                    yield str(scen), methods[a], methods[b]
