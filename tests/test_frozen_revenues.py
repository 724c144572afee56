"""Independent-demand numbers frozen from rmkit before demand and controls became interfaces.

Every value below was computed on 2026-12-02 with rmkit's main line at commit 69a672e (version
0.1, before the demand-model interface, the customer-plus-purchase-number streams and the
control registry), by ``rmkit.simulate.simulate`` on the bundled example and on the public
instance rm_200_4_1.6_8.0 (Topaloglu 2009). The same seed must still give the same customers and
the same revenues to the last bit: the refactoring changed where the code lives, not what it
computes. These are regression values of our own, not published ones.
"""

from __future__ import annotations

import hashlib

import pytest

from rmkit import load_scenario
from rmkit.workflows.simulate import simulate
from tests.conftest import EXAMPLE, vendored

#: (policy, settings) -> (mean revenue, first three path revenues, refused requests in total),
#: 300 paths, seed 20261202, on the bundled example.
EXAMPLE_RUNS = {
    ("fcfs", ()): (7763.266666666666, (7775.0, 7120.0, 8110.0), 7429),
    ("dlp", (("resolve", 5),)): (9036.783333333333, (8725.0, 8930.0, 9230.0), 6837),
    ("exact", ()): (9426.983333333334, (10050.0, 9275.0, 9260.0), 6988),
    ("emsrb", (("resolve", 3),)): (9285.183333333332, (9615.0, 9305.0, 9040.0), 6953),
    ("dpd", (("resolve", 2),)): (9401.133333333333, (9910.0, 9130.0, 9260.0), 7075),
    ("davn", ()): (9266.216666666667, (9900.0, 9100.0, 8870.0), 7437),
    ("emsrb-heuristic", ()): (9373.4, (9330.0, 9565.0, 9160.0), 6664),
    ("dlp", (("resolve_every_sale", True),)): (9339.066666666668, (9605.0, 9195.0, 9320.0), 6814),
}
#: 200 paths, seed 7, on rm_200_4_1.6_8.0.
PUBLIC_RUNS = {
    ("dlp", (("resolve", 5),)): (23547.6, (23777.0, 23799.0, 20868.0), 15091),
    ("fcfs", ()): (9905.165, (10852.0, 10545.0, 11621.0), 14874),
}
#: sha256 of the int32 request streams (customer types) at commit 69a672e.
STREAM_HASHES = {
    ("example", 50, 3): "d95a49a8a020e0f6e7e1c0c44bd401c4c144d3ef6309c1452cc0e5cdc2480a6f",
    ("rm_200_4_1.6_8.0", 40, 11): "3cd8a9fbd75a28d65ce7c2e3fe7d09efddb014b3eee4b5788163485df3be1f4f",
}


def _scenario(name: str):
    return load_scenario(EXAMPLE if name == "example" else vendored(name))


@pytest.mark.parametrize("key", sorted(STREAM_HASHES))
def test_the_same_seed_draws_the_same_customers(key):
    name, paths, seed = key
    arrivals = _scenario(name).demand.sample_arrivals(paths, seed)
    assert arrivals.customer.dtype.str.endswith("i4")
    assert hashlib.sha256(arrivals.customer.tobytes()).hexdigest() == STREAM_HASHES[key]


RUNS = {**{("example", 300, 20261202, *key): v for key, v in EXAMPLE_RUNS.items()},
        **{("rm_200_4_1.6_8.0", 200, 7, *key): v for key, v in PUBLIC_RUNS.items()}}


@pytest.mark.parametrize("key", sorted(RUNS), ids=str)
def test_revenues_are_unchanged(key):
    name, paths, seed, policy, settings = key
    scen = _scenario(name)
    ds = simulate(scen.network, scen.demand, policy, paths=paths, seed=seed, **dict(settings))
    mean, first, refused = RUNS[key]
    assert float(ds.revenue_mean) == mean
    assert tuple(float(v) for v in ds.revenue.values[:3]) == first
    assert int(ds.no_purchase.sum()) == refused
