"""Instance generators: the public hub-and-spoke family's structure, exact load factors, lines.

External reference: the public hub-and-spoke test problems of H. Topaloglu (2009), "Using
Lagrangian relaxation to compute capacity-dependent bid prices in network revenue management",
Operations Research 57(3):637-649 (shipped with rmkit in rmkit/data/hub-spoke). The generated
family is checked against their structure, and the load factor is recomputed here from the written
TOML with plain arithmetic, not with rmkit's own ``load_factor``.
"""

from __future__ import annotations

import subprocess
import sys
import tomllib

import numpy as np
import pytest

from rmkit import InputError, load_scenario
from rmkit.model.demand import load_factor
from rmkit.model.generators import hub_and_spoke, line_network
from rmkit.model.hub_spoke import parse_instance_name
from rmkit.model.scenario import save_scenario
from tests.conftest import ROOT, instance_path


def alpha_from_toml(path) -> float:
    """Expected seat requests / total capacity, straight from the TOML tables."""
    data = tomllib.loads(path.read_text(encoding="utf-8"))
    p = np.array(data["demand"]["probabilities"], dtype=float)
    legs_used = np.array([len(prod["legs"]) for prod in data["product"]], dtype=float)
    seat_requests = float((p.sum(axis=0) * legs_used).sum())
    return seat_requests / sum(leg["capacity"] for leg in data["leg"])


@pytest.mark.parametrize(
    ("spokes", "alpha", "kappa", "periods", "seed"),
    [(4, 1.0, 4.0, 200, 0), (4, 1.6, 8.0, 200, 1), (5, 1.2, 4.0, 600, 2), (2, 0.8, 3.0, 40, 3)],
)
def test_hub_spoke_load_factor_matches_request(tmp_path, spokes, alpha, kappa, periods, seed):
    scenario = hub_and_spoke(spokes, alpha=alpha, kappa=kappa, periods=periods, seed=seed)
    path = tmp_path / "hub.toml"
    save_scenario(scenario, path)
    computed = alpha_from_toml(path)
    assert round(computed, 2) == round(alpha, 2)
    assert computed == pytest.approx(alpha, abs=1e-9)  # the scaling meets it exactly
    back = load_scenario(path)
    assert np.array_equal(back.demand.probabilities, scenario.demand.probabilities)
    assert np.array_equal(back.network.capacities, scenario.network.capacities)


@pytest.mark.parametrize("name", ["rm_200_4_1.2_4.0", "rm_200_4_1.6_8.0", "rm_200_5_1.0_8.0",
                                  "rm_600_6_1.6_4.0"])
def test_hub_spoke_reproduces_the_public_family(name):
    """Same legs, products, incidence, fare ratio and demand shape as the published instance."""
    bench = load_scenario(instance_path(name))
    info = parse_instance_name(name)
    n, t_count = info["spokes"], info["periods"]
    gen = hub_and_spoke(n, alpha=info["alpha"], kappa=info["kappa"], periods=t_count,
                        arrival=float(bench.demand.probabilities.sum(axis=1).mean()), seed=5)
    for s in (bench, gen):
        net, p = s.network, s.demand.probabilities
        assert net.n_legs == 2 * n
        assert net.n_products == 2 * n * (n + 1)
        assert int((net.incidence.sum(axis=0) == 2).sum()) == 2 * n * (n - 1)  # spoke to spoke
        cls = np.array([int(prod.fare_class) for prod in net.products])
        assert cls.tolist() == [0, 1] * (n * (n + 1))
        fares = net.fares
        assert np.allclose(fares[cls == 1] / fares[cls == 0], info["kappa"])
        pair_rate = p[:, cls == 0] + p[:, cls == 1]
        assert np.allclose(pair_rate, pair_rate[0])  # each pair's arrival rate is constant
        dear = p[:, cls == 1].sum(axis=1)
        first_dear = int(np.argmax(dear > 0))
        assert t_count // 2 <= first_dear <= (2 * t_count) // 3  # cheap first, expensive later
        assert dear[-1] > 0.9 * p[-1].sum()  # nearly all requests are expensive at the end
        assert load_factor(net, s.demand) == pytest.approx(info["alpha"], abs=0.005)
    assert np.array_equal(bench.network.incidence, gen.network.incidence)


def test_generators_are_seeded_and_deterministic(tmp_path):
    a, b, c = tmp_path / "a.toml", tmp_path / "b.toml", tmp_path / "c.toml"
    save_scenario(hub_and_spoke(3, alpha=1.2, periods=50, seed=11), a)
    save_scenario(hub_and_spoke(3, alpha=1.2, periods=50, seed=11), b)
    save_scenario(hub_and_spoke(3, alpha=1.2, periods=50, seed=12), c)
    assert a.read_text() == b.read_text()
    assert a.read_text() != c.read_text()
    line = line_network(3, alpha=1.0, periods=80, seed=4)
    assert np.array_equal(line.demand.probabilities,
                          line_network(3, alpha=1.0, periods=80, seed=4).demand.probabilities)


def test_line_network_structure_and_load_factor(tmp_path):
    k, m = 4, 3
    s = line_network(k, alpha=1.3, classes=m, ratio=1.5, periods=150, seed=9)
    net = s.network
    assert net.n_legs == k
    assert net.n_products == m * k * (k + 1) // 2
    # every origin-destination pair o < d uses legs o .. d-1 (brute force over the pairs)
    pairs = [(o, d) for o in range(k + 1) for d in range(o + 1, k + 1)]
    expected = np.zeros((k, len(pairs) * m), dtype=int)
    for q, (o, d) in enumerate(pairs):
        expected[o:d, q * m:(q + 1) * m] = 1
    assert np.array_equal(net.incidence, expected)
    fares = net.fares.reshape(len(pairs), m)
    assert np.allclose(fares[:, 1:] / fares[:, :-1], 1.5)
    path = tmp_path / "line.toml"
    save_scenario(s, path)
    assert round(alpha_from_toml(path), 2) == 1.3
    # cheaper classes book earlier: mean request period rises with the class
    p = s.demand.probabilities
    t = np.arange(p.shape[0])
    cls = np.array([int(prod.fare_class) for prod in net.products])
    mean_period = [float((p[:, cls == c].sum(axis=1) * t).sum() / p[:, cls == c].sum())
                   for c in range(m)]
    assert mean_period[0] < mean_period[1] < mean_period[2]


def test_place_names_are_invented_words():
    s = hub_and_spoke(3, alpha=1.0, periods=30, seed=0)
    assert s.network.products[0].origin == "Brannoch"
    assert all(leg.name for leg in s.network.legs)


@pytest.mark.parametrize(
    ("call", "field"),
    [
        (lambda: hub_and_spoke(0, alpha=1.0), "spokes"),
        (lambda: hub_and_spoke(3, alpha=-1.0), "alpha"),
        (lambda: hub_and_spoke(3, alpha=1.0, kappa=0.5), "kappa"),
        (lambda: hub_and_spoke(3, alpha=1.0, arrival=1.5), "arrival"),
        (lambda: line_network(2, alpha=1.0, fares=(50, 10)), "fares"),
        (lambda: line_network(2, alpha=1.0, arrival=5.0, periods=20), "periods"),
        (lambda: hub_and_spoke(1, alpha=100.0, periods=2), "alpha"),
    ],
)
def test_bad_settings_name_the_field(call, field):
    with pytest.raises(InputError, match=field):
        call()


def _cli(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "rmkit", *args], capture_output=True, text=True,
                          cwd=ROOT, timeout=120)


def test_generate_command_writes_a_loadable_scenario(tmp_path):
    out = tmp_path / "g.toml"
    done = _cli("generate", "hub-spoke", "--spokes", "3", "--alpha", "1.4", "--periods", "60",
                "--seed", "2", "--out", str(out), "--json")
    assert done.returncode == 0, done.stderr
    assert round(alpha_from_toml(out), 2) == 1.4
    line = tmp_path / "l.toml"
    assert _cli("generate", "line", "--legs", "3", "--alpha", "0.9", "--out", str(line)).returncode == 0
    assert load_scenario(line).network.n_products == 12
    bad = _cli("generate", "hub-spoke", "--spokes", "3", "--alpha", "-2", "--out", str(out))
    assert bad.returncode == 2
    assert "alpha" in bad.stderr and len(bad.stderr.strip().splitlines()) == 1
