"""Bad options and output paths through the real command line: one line naming the option, exit 2,
no traceback, nothing written, and output paths refused before any work."""

from __future__ import annotations

import subprocess
import sys
import time

import pytest

from tests.conftest import EXAMPLE
from tests.fuzz_inputs import BASE_TOML


def rmkit(*args: str, cwd=None) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "rmkit", *args], capture_output=True, text=True,
                          cwd=cwd, timeout=600)


def one_line_refusal(out: subprocess.CompletedProcess, *needles: str) -> str:
    assert out.returncode == 2, (out.returncode, out.stderr)
    assert "Traceback" not in out.stderr
    lines = out.stderr.strip().splitlines()
    assert len(lines) == 1, out.stderr
    for needle in needles:
        assert needle in lines[0], lines[0]
    return lines[0]


@pytest.fixture
def scenario(tmp_path):
    path = tmp_path / "base.toml"
    path.write_text(BASE_TOML)
    return path


@pytest.mark.parametrize(("args", "needles"), [
    (["simulate", "{s}", "--policy", "dlp", "--paths", "abc"],
     ["--paths: expected a whole number >= 1, got 'abc'"]),
    (["bound", "{s}"], ["required: --method"]),
    (["bound", "{s}", "--method", "ph", "--seed", "-1"], ["--seed: expected a whole number in [0, "]),
    (["bidprices", "{s}", "--method", "rlp", "--seed", str(2**63)], ["--seed"]),
    (["bound", "{s}", "--method", "dlp", "--capacity", "-1,2"],
     ["--capacity[0]: remaining capacity of leg 'ash-birch' must be in [0, 3], got -1"]),
    (["bound", "{s}", "--method", "dlp", "--capacity", "ash-birch=1,ash-birch=2"],
     ["--capacity: leg 'ash-birch' is given twice"]),
    (["bound", "{s}", "--method", "dlp", "--capacity", "C=1"],
     ["--capacity: unknown leg id 'C'; legs are 'ash-birch', 'birch-cedar'"]),
    (["bound", "{s}", "--method", "dlp", "--capacity", "a\nb=1"], ["--capacity: unknown leg id"]),
    (["bound", "{s}", "--method", "dlp", "--capacity", f"{10**30},1"], ["--capacity"]),
    (["generate", "line", "--legs", "2", "--alpha", "nan", "--out", "x.toml"],
     ["--alpha: expected a finite number"]),
    (["compare", "{s}", "--param", "rlp.samples=-1", "--methods", "dlp,rlp"],
     ["'samples' parameter of rlp"]),
])
def test_bad_options_are_one_line(tmp_path, scenario, args, needles):
    out = rmkit(*[a.format(s=scenario) for a in args], cwd=tmp_path)
    one_line_refusal(out, *needles)
    assert "solving" not in out.stderr
    assert sorted(p.name for p in tmp_path.iterdir()) == ["base.toml"]


def test_defaults_errors_name_the_file_and_field(tmp_path):
    path = tmp_path / "d.toml"
    path.write_text(BASE_TOML.replace("paths = 40", "paths = 0"))
    for command in (["simulate", str(path), "--policy", "dlp"], ["compare", str(path)]):
        one_line_refusal(rmkit(*command), str(path), "defaults.paths: must be >= 1")


def test_size_refusals_name_the_file(tmp_path):
    path = tmp_path / "big.toml"
    path.write_text(BASE_TOML.replace("capacity = 3", f"capacity = {10**12}"))
    line = one_line_refusal(rmkit("bidprices", str(path), "--method", "dpd"), "needs about")
    assert line.startswith(f"rmkit: error: {path}: dpd: cannot run")
    line = one_line_refusal(rmkit("bound", str(path), "--method", "exact"), "max_memory_gb")
    assert line.startswith(f"rmkit: error: {path}: exact: cannot run")


@pytest.mark.parametrize("target", ["/proc/x.{ext}", "{tmp}", "{tmp}/missing/x.{ext}"])
@pytest.mark.parametrize(("command", "ext", "option"), [
    (["bidprices", "{s}", "--method", "dlp"], "nc", "--out"),
    (["simulate", "{s}", "--policy", "dlp"], "nc", "--out"),
    (["compare", "{s}"], "png", "--plot"),
    (["generate", "line", "--legs", "2", "--alpha", "1"], "toml", "--out"),
])
def test_output_paths_refused_before_work(tmp_path, scenario, command, ext, option, target):
    where = target.format(tmp=tmp_path, ext=ext)
    out = rmkit(*[a.format(s=scenario) for a in command], option, where, cwd=tmp_path)
    one_line_refusal(out, option)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["base.toml"]


def test_output_refusal_comes_before_any_solve():
    """compare of every method on the example takes minutes; a bad --out is refused at once."""
    started = time.perf_counter()
    out = rmkit("compare", str(EXAMPLE), "--out", "/proc/rmkit-x.nc")
    seconds = time.perf_counter() - started
    one_line_refusal(out, "--out: cannot write in folder '/proc'")
    assert "solving" not in out.stderr  # compare announces each solve on stderr
    assert seconds < 60, seconds  # a start-up, not a comparison (generous: the machine is shared)


def test_demo_out_dir_checked_first(tmp_path):
    (tmp_path / "file").write_text("x")
    one_line_refusal(rmkit("demo", "--out-dir", str(tmp_path / "file" / "d")), "--out-dir")
    one_line_refusal(rmkit("demo", "--out-dir", "/proc/rmkit-demo"), "--out-dir")
