"""Choice demand (rmkit.model.choice): MNL probabilities, scenario tables, bad input, sampling."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

from rmkit import InputError
from rmkit.model.choice import ChoiceDemand
from rmkit.model.scenario import load_scenario, save_scenario, scenario_from_model
from tests.choice_instances import example_zero, parallel_flights
from tests.instances import small_problem

SCENARIO = """
[scenario]
name = "two-legs"
[[leg]]
id = "a"
capacity = 3
[[leg]]
id = "b"
capacity = 2
[[product]]
id = "p1"
fare = 100.0
legs = ["a"]
[[product]]
id = "p2"
fare = 200.0
legs = ["a", "b"]
[[product]]
id = "p3"
fare = 150.0
legs = ["b"]
[demand]
periods = 4
[[demand.segment]]
id = "x"
arrival = 0.3
consider = ["p1", "p2"]
weights = [1.0, 2.0]
no_purchase = 1.0
[[demand.segment]]
id = "y"
expected = 1.0
shape = [2.0, 3.0]
consider = ["p2", "p3"]
weights = [1.5, 0.5]
"""


def test_mnl_probabilities_by_hand():
    """Segment 1 of Liu & van Ryzin's parallel flights, everything offered, case 1 (v0 = 1):
    P(p4) = 10 / (1 + 5 + 10 + 1) = 10/17 (by hand)."""
    _, dem = parallel_flights()
    q = dem.purchase_probabilities()
    assert q[0, 3] == pytest.approx(10 / 17, rel=1e-15)
    offered = np.array([False, True, False, False, False, True])
    assert dem.purchase_probabilities(offered)[0, 1] == pytest.approx(5 / 7, rel=1e-15)
    assert dem.sale_probabilities(offered, period=299).shape == (1, 6)


def test_independent_equivalent_has_the_same_numbers():
    net, ind = small_problem()
    ch = ChoiceDemand.independent_equivalent(ind.probabilities)
    np.testing.assert_array_equal(ch.sale_probabilities(), ind.probabilities)
    a, b = ind.sample_arrivals(50, 9), ch.sample_arrivals(50, 9)
    np.testing.assert_array_equal(a.customer, b.customer)
    assert ch.customer_type_ids(net) == ["s0", "s1", "s2", "s3", "s4", "s5"]


def test_round_trip_is_exact(tmp_path):
    path = tmp_path / "s.toml"
    path.write_text(SCENARIO)
    s = load_scenario(path)
    assert s.demand.kind == "choice"
    assert s.demand.customer_type_ids(s.network) == ["x", "y"]
    out = tmp_path / "back.toml"
    save_scenario(s, out)
    back = load_scenario(out)
    assert back.demand.fingerprint() == s.demand.fingerprint()
    for net, dem in (parallel_flights(0.6), example_zero()):
        sc = scenario_from_model(net, dem, "x")
        save_scenario(sc, tmp_path / "x.toml")
        assert load_scenario(tmp_path / "x.toml").demand.fingerprint() == dem.fingerprint()


def test_curve_form_spreads_expected_arrivals(tmp_path):
    path = tmp_path / "s.toml"
    path.write_text(SCENARIO)
    lam = load_scenario(path).demand.arrival
    assert lam[:, 1].sum() == pytest.approx(1.0, rel=1e-12)
    assert np.all(lam[:, 0] == 0.3)


BAD = [
    ('consider = ["p1", "p2"]', 'consider = ["p1", "p9"]',
     "demand.segment[0].consider: unknown product 'p9'"),
    ("weights = [1.0, 2.0]", "weights = [1.0, -2.0]", "demand.segment[0].weights[1]: a preference"),
    ("weights = [1.0, 2.0]", "weights = [1.0, inf]", "demand.segment[0].weights[1]: a preference"),
    ("weights = [1.0, 2.0]", "weights = [1.0]", "demand.segment[0].weights: has 1 weights"),
    ('consider = ["p1", "p2"]\nweights = [1.0, 2.0]', "consider = []\nweights = []",
     "demand.segment[0].consider: is empty"),
    ("arrival = 0.3", "arrival = 0.9", "sum to 1.16172 > 1 in period 0"),
    ("[demand]\n", "[demand]\nprobabilities = [[0.1, 0.1, 0.1]]\n", "mixes tables of different "
     "demand kinds (probabilities for independent demand; segment for choice demand)"),
    ("arrival = 0.3", "arrival = [0.3, 0.3]", "demand.segment[0].arrival: has 2 values"),
    ("no_purchase = 1.0", "no_purchase = -1.0", "demand.segment[0].no_purchase"),
    ('id = "y"', 'id = "x"', "demand.segment[1].id: 'x' is also segment 0"),
    ("expected = 1.0\n", "", "demand.segment[1]: give either arrival"),
    ("expected = 1.0\n", "arrival = 0.1\n", "demand.segment[1].shape: goes with expected"),
]


@pytest.mark.parametrize(("old", "new", "message"), BAD)
def test_bad_input_names_the_field(tmp_path, old, new, message):
    assert old in SCENARIO
    path = tmp_path / "bad.toml"
    path.write_text(SCENARIO.replace(old, new, 1))
    with pytest.raises(InputError) as err:
        load_scenario(path)
    text = str(err.value)
    assert message in text and str(path) in text and "\n" not in text


def test_bad_input_from_the_command_line(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(SCENARIO.replace('"p1", "p2"]', '"p1", "p9"]', 1))
    before = sorted(p.name for p in tmp_path.iterdir())
    run = subprocess.run([sys.executable, "-m", "rmkit", "info", str(path)],
                         capture_output=True, text=True, cwd=tmp_path)
    assert run.returncode == 2
    assert "Traceback" not in run.stderr
    assert "demand.segment[0].consider: unknown product 'p9'" in run.stderr
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def test_constructor_checks():
    with pytest.raises(InputError, match="at most one customer"):
        ChoiceDemand(np.array([[0.7, 0.7]]), [[0], [0]], [[1.0], [1.0]], [0, 0], 1)
    with pytest.raises(InputError, match=r"consider: product index 3"):
        ChoiceDemand(np.array([[0.5]]), [[3]], [[1.0]], [0], 2)


def test_purchase_numbers_are_uniform_within_a_segment():
    _, dem = parallel_flights()
    arr = dem.sample_arrivals(400, 3)
    u = arr.uniform[arr.customer == 2]
    assert u.min() >= 0 and u.max() < 1
    assert abs(u.mean() - 0.5) < 4 * np.sqrt(1 / 12 / u.size)  # 4 SE of a uniform mean
