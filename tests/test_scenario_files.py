"""Scenario TOML: load, save, round trip; the public benchmark reader."""

from __future__ import annotations

import numpy as np
import pytest

from rmkit import InputError, load_factor, load_scenario, save_scenario, scenario_from_model
from rmkit.model.hub_spoke import parse_instance_name
from tests.conftest import DATA, EXAMPLE, HUB_SPOKE, shared_names


def test_example_round_trips_exactly(tmp_path):
    scen = load_scenario(EXAMPLE)
    out = tmp_path / "copy.toml"
    save_scenario(scen, out)
    back = load_scenario(out)
    assert back.spec == scen.spec
    np.testing.assert_array_equal(back.demand.probabilities, scen.demand.probabilities)
    np.testing.assert_array_equal(back.network.incidence, scen.network.incidence)
    np.testing.assert_array_equal(back.network.fares, scen.network.fares)
    save_scenario(back, tmp_path / "again.toml")
    assert (tmp_path / "again.toml").read_text() == out.read_text()


def test_example_is_small_enough_for_exact_dp():
    scen = load_scenario(EXAMPLE)
    assert 3 <= scen.network.n_legs <= 4 and 8 <= scen.network.n_products <= 12
    assert scen.network.state_space_size <= 1_000_000


def test_benchmark_scenario_round_trips_through_toml(tmp_path):
    scen = load_scenario(DATA / "rm_200_4_1.0_4.0.txt.gz")
    save_scenario(scen, tmp_path / "b.toml")
    back = load_scenario(tmp_path / "b.toml")
    np.testing.assert_array_equal(back.demand.probabilities, scen.demand.probabilities)
    assert back.network.leg_ids == scen.network.leg_ids


def _check_instance(path):
    """Family facts (Topaloglu 2009, and the data set's own description)."""
    scen = load_scenario(path)
    info = parse_instance_name(path.name)
    n = info["spokes"]
    net = scen.network
    assert net.n_legs == 2 * n
    assert net.n_products == 2 * n * (n + 1)
    assert scen.demand.n_periods == info["periods"]
    # Capacities are whole numbers rounded from expected leg demand / alpha, so the computed
    # alpha differs from the nominal one by at most the rounding: each leg's capacity moves by
    # <= 0.5 seat, which shifts alpha by <= alpha * 0.5 * legs / total capacity.
    alpha = load_factor(net, scen.demand)
    rounding = info["alpha"] * 0.5 * net.n_legs / float(net.capacities.sum())
    assert abs(alpha - info["alpha"]) <= rounding
    two_leg = [p for p in net.products if len(p.legs) == 2]
    assert len(two_leg) == 2 * n * (n - 1)
    expensive = {(p.origin, p.destination): p.fare for p in net.products if p.fare_class == "1"}
    for p in net.products:
        if p.fare_class == "0":
            assert expensive[(p.origin, p.destination)] == pytest.approx(info["kappa"] * p.fare)


@pytest.mark.parametrize("name", shared_names())
def test_all_public_instances(name):
    _check_instance(HUB_SPOKE / f"{name}.txt.gz")


def test_all_48_public_instances_ship_with_the_package():
    from rmkit.model.benchmarks import instance_names, instance_path

    assert len(instance_names()) == 48 and instance_names() == shared_names()
    assert instance_path("rm_600_8_1.6_8.0") == HUB_SPOKE / "rm_600_8_1.6_8.0.txt.gz"
    assert instance_path("somewhere/rm_200_4_1.0_4.0") is None  # a path is never redirected
    by_name = load_scenario("rm_200_4_1.0_4.0")  # a name alone reads the shipped copy
    assert by_name.network.n_legs == 8 and by_name.name == "rm_200_4_1.0_4.0"


def test_plain_text_and_gzip_read_the_same(tmp_path):
    import gzip

    src = DATA / "rm_200_4_1.6_8.0.txt.gz"
    plain = tmp_path / "rm_200_4_1.6_8.0.txt"
    plain.write_bytes(gzip.decompress(src.read_bytes()))
    a, b = load_scenario(src), load_scenario(plain)
    np.testing.assert_array_equal(a.demand.probabilities, b.demand.probabilities)


GOOD = """
[[leg]]
id = "north"
capacity = 3

[[product]]
id = "n1"
fare = 100
legs = ["north"]

[demand]
periods = 2
probabilities = [[0.5], [0.25]]
"""


@pytest.mark.parametrize(
    ("edit", "match"),
    [
        (lambda s: s.replace("capacity = 3", "capacity = -3"), r"leg\[0\]\.capacity"),
        (lambda s: s.replace("capacity = 3", "capacity = 2.5"), r"leg\[0\]\.capacity.*whole"),
        (lambda s: s.replace("fare = 100", "fare = 0"), r"product\[0\]\.fare"),
        (lambda s: s.replace("fare = 100", "fare = nan"), r"product\[0\]\.fare"),
        (lambda s: s.replace('legs = ["north"]', 'legs = ["south"]'), "unknown leg 'south'"),
        (lambda s: s.replace("capacity = 3", "capacity = 3\ncolour = 1"), "unknown field 'colour'"),
        (lambda s: s.replace("[[0.5], [0.25]]", "[[1.5], [0.25]]"), r"\[0, 1\]"),
        (lambda s: s.replace("[[0.5], [0.25]]", "[[0.5]]"), "one row per period"),
        (lambda s: s.replace("fare = 100", "fare = 100 ="), "malformed TOML"),
    ],
)
def test_bad_scenarios_name_the_field(tmp_path, edit, match):
    path = tmp_path / "bad.toml"
    path.write_text(edit(GOOD))
    with pytest.raises(InputError, match=match):
        load_scenario(path)


def test_sparse_requests_and_period_out_of_range(tmp_path):
    text = GOOD.replace(
        "probabilities = [[0.5], [0.25]]",
        '[[demand.request]]\nperiod = 1\nproduct = "n1"\nprobability = 0.3',
    )
    path = tmp_path / "sparse.toml"
    path.write_text(text)
    assert load_scenario(path).demand.probabilities.tolist() == [[0.0], [0.3]]
    path.write_text(text.replace("period = 1", "period = 7"))
    with pytest.raises(InputError, match=r"demand\.request\[0\]\.period.*\[0, 1\].*7"):
        load_scenario(path)


def test_scenario_from_model_round_trip(tmp_path):
    from tests.instances import small_problem

    net, dem = small_problem()
    scen = scenario_from_model(net, dem, "tiny")
    save_scenario(scen, tmp_path / "t.toml")
    back = load_scenario(tmp_path / "t.toml")
    np.testing.assert_array_equal(back.demand.probabilities, dem.probabilities)
    np.testing.assert_array_equal(back.network.fares, net.fares)


def test_missing_file_message():
    with pytest.raises(InputError, match="no such file"):
        load_scenario("/nonexistent/where.toml")
