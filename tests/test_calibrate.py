"""``rmkit calibrate``: the search, the fresh-path guard, scaled policies and bad input.

Independent references: the exact optimum of the small network is checked against the plain
backward induction of tests/instances.py; a bid-price policy scaled by 0 must earn exactly what
first come, first served earns (it accepts every request with seats left), and one scaled by a
huge factor must sell nothing.
"""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

from rmkit import InputError, get_solver
from rmkit.model.scenario import save_scenario, scenario_from_model
from rmkit.workflows.calibrate import ScaledPolicy, calibrate, parse_range, tunable_names, tunables
from rmkit.workflows.policies import SolverPolicy
from rmkit.workflows.simulate import simulate
from tests.instances import brute_force_values, small_problem


@pytest.fixture(scope="module")
def tuned():
    net, dem = small_problem()
    return calibrate(net, dem, "emsrb-heuristic",
                     {"multiplier": "0.3:2.0", "fare_basis": "prorated,network"},
                     paths=300, seed=2)


def test_tuned_beats_default_on_fresh_paths_within_noise_and_stays_below_the_optimum(tuned):
    net, dem = small_problem()
    optimum = brute_force_values(net, dem)[0][tuple(int(c) for c in net.capacities)]
    a = tuned.attrs
    kind, method, value = a["reference_kind"], a["reference_method"], a["reference_value"]
    assert (kind, method) == ("optimum", "exact") and value == pytest.approx(optimum, rel=1e-9)
    se = float(tuned["improvement_stderr"])
    fresh = tuned["fresh_revenue_mean"].values
    assert fresh[a["tuned_setting"]] >= fresh[a["default_setting"]] - 3 * se
    q_tuned, q_default = a["tuned_setting"], a["default_setting"]
    fresh_se = tuned["fresh_revenue_stderr"].values
    assert fresh[q_tuned] <= optimum + 3 * fresh_se[q_tuned]
    # the default (multiplier 1, prorated) lies in the ranges, so on the search paths the
    # winner is the best of every setting tried, the default included, by construction
    search = tuned["revenue_mean"].values
    assert search[q_tuned] == search.max() >= search[q_default]
    assert a["fresh_seed"] == 3 and tuned["multiplier"].values[q_default] == 1.0
    assert 0.3 <= tuned["multiplier"].values[q_tuned] <= 2.0
    assert tuned["fare_basis"].values[q_tuned] in ("prorated", "network")
    # the grid, then scipy's refinement inside the best cell
    assert a["evaluations"] > 2 * 9
    # only the default and the tuned setting are re-measured on fresh paths
    assert np.isfinite(fresh).sum() == (1 if q_tuned == q_default else 2)


def test_report_is_json_and_the_dataset_follows_the_schema(tuned):
    from rmkit import schema
    from rmkit.workflows.calibrate import calibration_report

    assert schema.check(tuned) == []
    out = json.loads(json.dumps(calibration_report(tuned)))
    assert {"heuristic", "default", "tuned", "improvement_fresh", "reference", "trail"} <= set(out)
    q = tuned.attrs["tuned_setting"]
    assert out["tuned"]["fresh_revenue"] == pytest.approx(float(tuned["fresh_revenue_mean"][q]))
    assert len(out["trail"]) == tuned.attrs["evaluations"]


def test_scaled_policy_limits():
    net, dem = small_problem()
    dlp = SolverPolicy(get_solver("dlp"))
    fcfs = simulate(net, dem, "fcfs", paths=200, seed=1)
    free = simulate(net, dem, ScaledPolicy(dlp, 0.0), paths=200, seed=1)
    np.testing.assert_array_equal(free["revenue"].values, fcfs["revenue"].values)
    closed = simulate(net, dem, ScaledPolicy(dlp, 1e6), paths=200, seed=1)
    assert float(closed["revenue"].max()) == 0.0
    table = SolverPolicy(get_solver("emsrb-heuristic"))
    free = simulate(net, dem, ScaledPolicy(table, 0.0), paths=200, seed=1)
    np.testing.assert_array_equal(free["revenue"].values, fcfs["revenue"].values)


def test_parse_range():
    TUNABLES = {**tunables(get_solver("davn")), **tunables(get_solver("emsrb-heuristic"))}
    assert parse_range("resolve", "0:3", TUNABLES["resolve"]) == ("choice", (0, 1, 2, 3))
    kind, grid = parse_range("buckets", "1:40", TUNABLES["buckets"])
    assert kind == "choice" and grid[0] == 1 and grid[-1] == 40 and len(grid) <= 11
    assert parse_range("multiplier", "0.5:1.5", TUNABLES["multiplier"]) == (
        "continuous", (0.5, 1.5))
    assert parse_range("fare_basis", "full,network", TUNABLES["fare_basis"]) == (
        "choice", ("full", "network"))
    for name, text in (("multiplier", "2:1"), ("buckets", "1.5:3"), ("fare_basis", "half"),
                       ("multiplier", "a:b")):
        with pytest.raises(InputError, match=name):
            parse_range(name, text, TUNABLES[name])


def test_unknown_names_list_the_valid_ones():
    net, dem = small_problem()
    with pytest.raises(InputError, match="valid methods"):
        calibrate(net, dem, "no-such-method", {"multiplier": "0:1"})
    with pytest.raises(InputError, match="valid settings: .*buckets") as err:
        calibrate(net, dem, "davn", {"wings": "0:1"})
    assert "multiplier" not in str(err.value)  # nested limits have no bid prices to scale
    assert set(tunable_names(get_solver("davn"))) == {
        "buckets", "displacement_iterations", "law", "resolve"}
    with pytest.raises(InputError, match="bound without a booking control"):
        calibrate(net, dem, "ph", {"resolve": "0:1"})


def _rmkit(*args):
    return subprocess.run([sys.executable, "-m", "rmkit", *args], capture_output=True,
                          text=True, timeout=600)


def test_cli(tmp_path):
    net, dem = small_problem()
    scenario = tmp_path / "small.toml"
    save_scenario(scenario_from_model(net, dem, "small"), scenario)
    done = _rmkit("calibrate", str(scenario), "--heuristic", "davn", "--search", "buckets=1:4",
                  "--paths", "100", "--json")
    assert done.returncode == 0, done.stderr
    out = json.loads(done.stdout)
    assert out["heuristic"] == "davn" and out["searched"] == {"buckets": [1, 2, 3, 4]}
    assert out["tuned"]["setting"]["buckets"] in (1, 2, 3, 4)
    # the default and the four searched settings (the default counted once if among them)
    assert out["evaluations"] == 4 + (out["default"]["setting"]["buckets"] not in (1, 2, 3, 4))
    trail = {e["setting"]["buckets"]: e["revenue"] for e in out["trail"]}
    assert out["tuned"]["revenue"] == max(trail[b] for b in (1, 2, 3, 4))
    bad = _rmkit("calibrate", str(scenario), "--heuristic", "davn", "--search", "colour=1:2")
    assert bad.returncode == 2 and "valid settings" in bad.stderr
    assert "Traceback" not in bad.stderr
    table = _rmkit("calibrate", str(scenario), "--heuristic", "dlp", "--search",
                   "multiplier=0.5:1.5", "--paths", "100")
    assert table.returncode == 0, table.stderr
    assert "fresh" in table.stdout and "tuned" in table.stdout
