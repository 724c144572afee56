"""Network and demand model: construction, validation, facts and sampling."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import binom, poisson

from rmkit import DemandModel, IndependentDemand, InputError, Leg, Network, Product, load_factor


def test_incidence_and_state_space():
    net = Network.build(
        legs=[("AB", 2), ("BC", 3)],
        products=[("AB-1", 50.0, ["AB"]), ("AC-1", 90.0, ["AB", "BC"]), ("BC-1", 40.0, ["BC"])],
    )
    assert net.incidence.tolist() == [[1, 1, 0], [0, 1, 1]]
    assert net.state_space_size == 3 * 4
    assert not net.incidence.flags.writeable
    assert net.product_legs(1).tolist() == [0, 1]


@pytest.mark.parametrize(
    ("legs", "products", "match"),
    [
        ([Leg("A", -1)], [Product("P", 1.0, ("A",))], r"leg\[0\]\.capacity.*-1"),
        ([Leg("A", 2.5)], [Product("P", 1.0, ("A",))], r"leg\[0\]\.capacity.*2\.5"),
        ([Leg("A", 1)], [Product("P", 0.0, ("A",))], r"product\[0\]\.fare.*> 0"),
        ([Leg("A", 1)], [Product("P", float("nan"), ("A",))], r"product\[0\]\.fare.*nan"),
        ([Leg("A", 1)], [Product("P", 5.0, ("Z",))], r"unknown leg 'Z'"),
        ([Leg("A", 1), Leg("A", 2)], [Product("P", 5.0, ("A",))], "duplicate leg id"),
        ([Leg("A", 1)], [Product("P", 5.0, ())], "uses no leg"),
    ],
)
def test_network_rejects_bad_fields(legs, products, match):
    with pytest.raises(InputError, match=match):
        Network(legs=tuple(legs), products=tuple(products))


@pytest.mark.parametrize(
    ("table", "match"),
    [
        ([[0.5, 0.6]], r"period 0.*sum to 1\.1"),
        ([[-0.1, 0.2]], r"period 0, product 0.*\[0, 1\]"),
        ([[0.1, float("nan")]], r"product 1"),
        ([[1.5, 0.0]], r"\[0, 1\]"),
    ],
)
def test_demand_rejects_bad_tables(table, match):
    with pytest.raises(InputError, match=match):
        DemandModel(np.array(table))


def test_demand_to_come_and_load_factor():
    net = Network.build(legs=[("A", 2), ("B", 2)], products=[("x", 1.0, ["A", "B"]),
                                                             ("y", 1.0, ["A"])])
    dem = DemandModel(np.array([[0.2, 0.3], [0.4, 0.1], [0.0, 0.5]]))
    np.testing.assert_allclose(dem.demand_to_come(1), [0.4, 0.6])
    np.testing.assert_allclose(dem.demand_to_come(3), [0.0, 0.0])
    # seat requests: product x uses 2 legs -> 2 * 0.6 + 0.9 = 2.1 over 4 seats
    assert load_factor(net, dem) == pytest.approx(2.1 / 4)


def test_exact_to_come_law_is_binomial_for_constant_probabilities():
    """Sum of T independent Bernoulli(q) is Binomial(T, q) (textbook identity)."""
    q, periods = 0.15, 40
    dem = DemandModel(np.full((periods, 1), q))
    pmf = dem.to_come_pmf(0, 60, law="exact")[0]
    np.testing.assert_allclose(pmf[:60], binom.pmf(np.arange(60), periods, q), atol=1e-13)
    pois = dem.to_come_pmf(0, 60, law="poisson")[0]
    np.testing.assert_allclose(pois[:60], poisson.pmf(np.arange(60), periods * q), atol=1e-13)


def test_booking_curves_spread_the_expected_demand():
    dem = IndependentDemand.from_booking_curves(200, np.array([10.0, 5.0]), np.array([[2, 5], [5, 2]]))
    np.testing.assert_allclose(dem.demand_to_come(0), [10.0, 5.0])
    half = dem.n_periods // 2
    early, late = dem.probabilities[:half].sum(0), dem.probabilities[half:].sum(0)
    assert early[0] > late[0] and late[1] > early[1]  # cheap books early, expensive late


def test_booking_curves_refuse_too_few_periods_and_say_how_many():
    with pytest.raises(InputError, match=r"use at least (\d+) periods") as err:
        IndependentDemand.from_booking_curves(20, np.array([30.0]), np.array([[2.0, 2.0]]))
    need = int(err.value.args[0].rsplit("at least ", 1)[1].split()[0])
    IndependentDemand.from_booking_curves(need, np.array([30.0]), np.array([[2.0, 2.0]]))
    with pytest.raises(InputError):
        IndependentDemand.from_booking_curves(need - 1, np.array([30.0]), np.array([[2.0, 2.0]]))


def test_streams_are_common_random_numbers():
    dem = DemandModel(np.array([[0.2, 0.3]] * 50))
    a = dem.sample_streams(40, seed=11)
    b = dem.sample_streams(40, seed=11)
    np.testing.assert_array_equal(a, b)
    np.testing.assert_array_equal(dem.sample_streams(10, seed=11), a[:10])
    assert not np.array_equal(a, dem.sample_streams(40, seed=12))
    assert a.dtype == np.int32 and set(np.unique(a)) <= {-1, 0, 1}


def test_demand_to_come_samples_count_the_streams():
    dem = DemandModel(np.array([[0.2, 0.3]] * 50))
    counts = dem.sample_demand_to_come(30, seed=5, period=10)
    streams = dem.sample_streams(30, seed=5)[:, 10:]
    np.testing.assert_array_equal(counts[:, 1], (streams == 1).sum(axis=1))


def test_grid_strides_refuse_a_grid_beyond_64_bit_indices_and_replay_needs_them_only_to_trace():
    """16 legs of 20 seats make 21**16 (about 1.4e21) states: the flat index would wrap around
    silently in int64 arithmetic (numpy only warned "overflow encountered in scalar multiply",
    seen in sweeps of the 8-spoke public instances)."""
    import warnings

    from rmkit.errors import ProblemTooLargeError
    from rmkit.model.network import grid_strides
    from rmkit.workflows.simulate import simulate

    np.testing.assert_array_equal(grid_strides(np.array([2, 3, 1])), [8, 2, 1])
    assert grid_strides(np.full(14, 20))[0] == 21**13  # 21**14 states still fit
    with pytest.raises(ProblemTooLargeError, match=r"1,430,568,690,241,985,328,321 states"):
        grid_strides(np.full(16, 20))
    legs = [(f"L{i}", 20) for i in range(16)]
    products = [(f"P{i}", 100.0, [f"L{i}"]) for i in range(16)]
    net = Network.build(legs, products, name="sixteen-legs")
    dem = DemandModel(np.full((10, 16), 0.05))
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        simulate(net, dem, "fcfs", paths=5, seed=1)
