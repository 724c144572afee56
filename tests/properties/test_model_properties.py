"""hypothesis invariants of the model layer: file round trips and the request sampler."""

from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np
from hypothesis import given
from hypothesis import strategies as st
from scipy.stats import binom

from rmkit import DemandModel, Network, load_scenario, save_scenario, scenario_from_model


@st.composite
def problems(draw):
    n_legs = draw(st.integers(1, 4))
    caps = draw(st.lists(st.integers(0, 50), min_size=n_legs, max_size=n_legs))
    n_products = draw(st.integers(1, 6))
    products = []
    for j in range(n_products):
        used = draw(st.lists(st.integers(0, n_legs - 1), min_size=1, max_size=n_legs, unique=True))
        fare = draw(st.floats(0.01, 1e5, allow_nan=False, allow_infinity=False))
        products.append((f"p{j}", fare, [f"leg{i}" for i in sorted(used)]))
    n_periods = draw(st.integers(1, 12))
    raw = np.array(
        draw(st.lists(st.floats(0, 1), min_size=n_periods * n_products,
                      max_size=n_periods * n_products))
    ).reshape(n_periods, n_products)
    scale = draw(st.floats(0, 1))
    sums = raw.sum(axis=1, keepdims=True)
    p = np.where(sums > 0, raw / np.maximum(sums, 1e-300) * scale, 0.0)
    net = Network.build([(f"leg{i}", c) for i, c in enumerate(caps)], products)
    return net, DemandModel(p)


@given(problems())
def test_random_problems_survive_save_and_load(problem):
    net, dem = problem
    with tempfile.TemporaryDirectory() as tmp:
        path = Path(tmp) / "s.toml"
        save_scenario(scenario_from_model(net, dem, "random"), path)
        back = load_scenario(path)
    np.testing.assert_array_equal(back.demand.probabilities, dem.probabilities)
    np.testing.assert_array_equal(back.network.incidence, net.incidence)
    np.testing.assert_array_equal(back.network.fares, net.fares)
    np.testing.assert_array_equal(back.network.capacities, net.capacities)


@given(problems(), st.integers(0, 2**32 - 1))
def test_sampled_frequencies_match_probabilities(problem, seed):
    _, dem = problem
    n_paths = 4000
    streams = dem.sample_streams(n_paths, seed)
    np.testing.assert_array_equal(streams, dem.sample_streams(n_paths, seed))
    p = dem.probabilities
    # each count is Binomial(n_paths, p): it must lie within the exact binomial quantiles of
    # 1e-9 on either side (scipy.stats.binom); a normal 5-sigma band is wrong for tiny p, where
    # one single hit already lies "5 sigma" out
    alpha = 1e-9
    for j in range(dem.n_products):
        count = (streams == j).sum(axis=0)
        assert np.all(count >= binom.ppf(alpha, n_paths, p[:, j]))
        assert np.all(count <= binom.isf(alpha, n_paths, p[:, j]))
    none = (streams == -1).sum(axis=0)
    q = np.clip(1 - p.sum(axis=1), 0.0, 1.0)
    assert np.all(none >= binom.ppf(alpha, n_paths, q))
    assert np.all(none <= binom.isf(alpha, n_paths, q))
