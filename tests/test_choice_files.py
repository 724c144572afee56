"""Choice scenarios on disk: the generated hub-and-spoke family and the bundled example."""

from __future__ import annotations

from pathlib import Path

import pytest

from rmkit import get_solver, load_scenario
from rmkit.model.demand import load_factor
from rmkit.model.families import GENERATORS, generate
from rmkit.model.scenario import save_scenario

ROOT = Path(__file__).resolve().parents[1]


def test_generator_is_registered_seeded_and_meets_alpha(tmp_path):
    assert "hub-spoke-choice" in GENERATORS
    a = generate("hub-spoke-choice", spokes=3, alpha=1.4, periods=60, seed=5)
    b = generate("hub-spoke-choice", spokes=3, alpha=1.4, periods=60, seed=5)
    c = generate("hub-spoke-choice", spokes=3, alpha=1.4, periods=60, seed=6)
    assert a.demand.fingerprint() == b.demand.fingerprint() != c.demand.fingerprint()
    assert load_factor(a.network, a.demand) == pytest.approx(1.4, rel=1e-12)
    assert a.demand.n_segments == 2 * 12 and a.network.n_products == 24
    save_scenario(a, tmp_path / "g.toml")
    assert load_scenario(tmp_path / "g.toml").demand.fingerprint() == a.demand.fingerprint()


def test_generator_shares_the_independent_family_network():
    ind = generate("hub-spoke", spokes=2, alpha=1.0, periods=40, seed=9)
    ch = generate("hub-spoke-choice", spokes=2, alpha=1.0, periods=40, seed=9)
    assert ind.network.product_ids == ch.network.product_ids
    assert list(ind.network.fares) == list(ch.network.fares)


def test_bundled_example_loads_and_is_solvable():
    source = ROOT / "examples" / "tallowmere-choice.toml"
    packaged = ROOT / "rmkit" / "examples" / "tallowmere-choice.toml"
    assert source.read_text() == packaged.read_text()
    s = load_scenario(packaged)
    assert s.demand.kind == "choice" and s.demand.n_segments == 13
    bound = get_solver("cdlp").solve(s.network, s.demand).value
    heuristic = get_solver("cdpd").solve(s.network, s.demand)
    assert heuristic.status == "optimal"
    assert bound > 0
