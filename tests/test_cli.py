"""The command line as scripts meet it: subprocess runs, JSON contract, bad input."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from tests.conftest import DATA, EXAMPLE
from tests.test_scenario_files import GOOD


def rmkit(*args: str, cwd=None) -> subprocess.CompletedProcess:
    return subprocess.run(
        [sys.executable, "-m", "rmkit", *args], capture_output=True, text=True, cwd=cwd, timeout=600
    )


def test_info_json_contract():
    out = rmkit("info", str(EXAMPLE), "--json")
    assert out.returncode == 0, out.stderr
    data = json.loads(out.stdout)
    for key in ("legs", "products", "periods", "alpha", "states"):
        assert key in data
    assert data["legs"] == 4 and data["products"] == 12 and data["states"] == 31 * 25 * 21 * 13


def test_info_reads_benchmark_files():
    out = rmkit("info", str(DATA / "rm_200_4_1.2_4.0.txt.gz"), "--json")
    data = json.loads(out.stdout)
    assert data["legs"] == 8 and data["products"] == 40 and data["periods"] == 200
    assert abs(data["alpha"] - 1.2) < 0.01


def test_info_human_table():
    out = rmkit("info", str(EXAMPLE))
    assert out.returncode == 0
    assert "quill-tallow" in out.stdout and "alpha" in out.stdout


BAD_EDITS = {
    "malformed": (lambda s: s.replace("fare = 100", "fare = = 100"), "malformed TOML"),
    "unknown-field": (lambda s: s.replace("capacity = 3", "capacity = 3\nseats = 2"),
                      "unknown field 'seats'"),
    "unknown-leg": (lambda s: s.replace('legs = ["north"]', 'legs = ["east"]'), "unknown leg"),
    "negative-capacity": (lambda s: s.replace("capacity = 3", "capacity = -1"), "capacity"),
    "fractional-capacity": (lambda s: s.replace("capacity = 3", "capacity = 1.5"), "capacity"),
    "zero-fare": (lambda s: s.replace("fare = 100", "fare = 0"), "fare"),
    "nan-fare": (lambda s: s.replace("fare = 100", "fare = nan"), "fare"),
    "probability": (lambda s: s.replace("[[0.5], [0.25]]", "[[-0.5], [0.25]]"), "[0, 1]"),
    "row-sum": (lambda s: s.replace("[[0.5], [0.25]]", "[[0.5, 0.6], [0.1, 0.1]]")
                .replace('legs = ["north"]', 'legs = ["north"]\n\n[[product]]\nid = "n2"\n'
                         'fare = 50\nlegs = ["north"]'), "sum to 1.1"),
    "period-range": (lambda s: s.replace(
        "probabilities = [[0.5], [0.25]]",
        '[[demand.request]]\nperiod = 5\nproduct = "n1"\nprobability = 0.2'), "period"),
}


@pytest.mark.parametrize("case", sorted(BAD_EDITS))
def test_bad_input_one_line_exit_2(tmp_path, case):
    edit, needle = BAD_EDITS[case]
    path = tmp_path / f"{case}.toml"
    path.write_text(edit(GOOD))
    out = rmkit("info", str(path))
    assert out.returncode == 2
    assert out.stdout == ""
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1, out.stderr
    assert "Traceback" not in out.stderr
    assert str(path) in lines[0] and needle in lines[0]


def test_missing_file_exit_2(tmp_path):
    out = rmkit("info", str(tmp_path / "nope.toml"))
    assert out.returncode == 2 and "no such file" in out.stderr
    assert "Traceback" not in out.stderr


def test_bad_input_writes_nothing(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text(GOOD.replace("fare = 100", "fare = -5"))
    target = tmp_path / "result.nc"
    out = rmkit("bidprices", str(path), "--method", "dlp", "--out", str(target))
    assert out.returncode == 2
    assert not target.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.toml"]


def test_unknown_method_lists_valid_ones():
    out = rmkit("bound", str(EXAMPLE), "--method", "no-such-method")
    assert out.returncode == 2
    assert "valid methods" in out.stderr and "Traceback" not in out.stderr


def test_bad_state_is_a_clear_error():
    out = rmkit("bidprices", str(EXAMPLE), "--method", "dlp", "--period", "9999")
    assert out.returncode == 2 and "--period" in out.stderr


def test_bound_solves_the_exact_dp_without_its_decision_table():
    # the example's DP needs 0.147 GiB with the decisions (what a policy replays) and 0.029 GiB
    # without: 'rmkit bound' reads only the value, so a limit between the two still solves it
    out = rmkit("bound", str(EXAMPLE), "--method", "exact", "--param", "max_memory_gb=0.06",
                "--json")
    assert out.returncode == 0, out.stderr
    data = json.loads(out.stdout)
    assert data["parameters"]["keep_decisions"] is False
    from rmkit import get_solver, load_scenario

    example = load_scenario(EXAMPLE)
    full = get_solver("exact").solve(example.network, example.demand)  # decisions kept
    assert full.policy.bits.shape[0] == 300
    assert data["value"] == full.value
    asked = rmkit("bound", str(EXAMPLE), "--method", "exact", "--param", "max_memory_gb=0.06",
                  "--param", "keep_decisions=true")  # an explicit setting still wins
    assert asked.returncode == 2 and "0.147 GiB" in asked.stderr
