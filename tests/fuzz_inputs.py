"""Generated bad input for the command line: mutations of a valid scenario TOML and benchmark text,
odd option values, and the judge of what each command run did.

A run is judged by what a user sees: exit 0 with output and no traceback or warning, or a clean
refusal (exit 2, exactly one stderr line ``rmkit: error: ...`` naming the file or an option, no
traceback, nothing written). Anything else is a crash, a hang (past the timeout), a multi-line
refusal, a leftover file, or a silent accept (exit 0 on input a mutation made invalid).
"""

from __future__ import annotations

import os
import subprocess
import sys
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

from hypothesis import strategies as st

ROOT = Path(__file__).resolve().parents[1]
TIMEOUT = 240  # seconds a run may take before it counts as a hang (the machine is shared)

BASE_TOML = """\
[scenario]
name = "fuzzbase"

[defaults]
seed = 7
paths = 40
resolve = 1

[[leg]]
id = "ash-birch"
capacity = 3

[[leg]]
id = "birch-cedar"
capacity = 2

[[product]]
id = "AB"
fare = 100.0
legs = ["ash-birch"]

[[product]]
id = "BC"
fare = 80.0
legs = ["birch-cedar"]

[[product]]
id = "AC"
fare = 150.0
legs = ["ash-birch", "birch-cedar"]

[demand]
periods = 6

[[demand.request]]
period = 0
product = "AB"
probability = 0.3

[[demand.request]]
period = 1
product = "AC"
probability = 0.4

[[demand.request]]
period = 3
product = "BC"
probability = 0.5

[[demand.request]]
period = 5
product = "AC"
probability = 0.6
"""


def base_benchmark(periods: int = 5) -> str:
    """A small text in the public benchmark layout: 2 spokes, 4 legs, 12 products."""
    legs = [(1, 0, 3), (2, 0, 2), (0, 1, 3), (0, 2, 2)]
    pairs = [(o, d) for o in range(3) for d in range(3) if o != d]
    products = [(o, d, c, 20.0 * (1 + o + d) * (4 if c else 1)) for o, d in pairs for c in (0, 1)]
    lines = ["# number of time periods", str(periods), "", "# flights", str(len(legs))]
    lines += [f"{o} {d} {cap}" for o, d, cap in legs]
    lines += ["", "# itineraries", str(len(products))]
    lines += [f"{o} {d} {c} {fare}" for o, d, c, fare in products]
    lines += ["", "# probabilities"]
    for t in range(periods):
        cells = [f"[ {o} {d} {c} ]\t{0.05 + 0.01 * ((t + k) % 3)}"
                 for k, (o, d, c, _) in enumerate(products)]
        lines.append(f"{t}\t" + "\t".join(cells))
    return "\n".join(lines) + "\n"


# ---------------------------------------------------------------- mutations
@dataclass(frozen=True)
class Case:
    """One generated input: the file's bytes (or None: the base file), the command-line
    options added to every command, and whether every command must refuse it."""

    label: str
    data: bytes | None
    suffix: str = ".toml"
    options: tuple[str, ...] = ()
    must_refuse: bool = False


ODD_NUMBERS = ["-1", "0", "1", "7", "1.5", "-0.5", "nan", "inf", "1e30", "1e308", str(2**63),
               str(2**63 - 1), str(10**12), str(10**30), '"7"', "true", "[]"]


def _whole(text: str, low: int, high: int) -> bool:
    return text.lstrip("-").isdigit() and low <= int(text) <= high


def _number(text: str, low: float, high: float) -> bool:
    try:
        value = float(text)
    except ValueError:
        return False
    return low <= value <= high


#: (TOML line to replace) -> which replacement values the file's rules accept there
NUMBER_FIELDS = {
    "capacity = 3": lambda v: _whole(v, 0, 2**53),
    "fare = 100.0": lambda v: _number(v, 0.0, 1e15) and float(v) > 0,
    "periods = 6": lambda v: _whole(v, 6, 10**6),  # requests name periods up to 5
    "seed = 7": lambda v: _whole(v, 0, 2**63 - 1),
    "paths = 40": lambda v: _whole(v, 1, 2**53),
    "resolve = 1": lambda v: _whole(v, 0, 6),
    "probability = 0.3": lambda v: _number(v, 0.0, 1.0),
    "period = 3": lambda v: _whole(v, 0, 5),
}


@st.composite
def scenario_cases(draw) -> Case:
    """A mutation of :data:`BASE_TOML`."""
    kind = draw(st.sampled_from(["number", "duplicate", "negative", "truncate", "bom", "id",
                                 "unknown", "missing", "resolve", "zero"]))
    text, refuse = BASE_TOML, True
    if kind == "number":
        line = draw(st.sampled_from(sorted(NUMBER_FIELDS)))
        value = draw(st.sampled_from(ODD_NUMBERS))
        text = text.replace(line, f"{line.split(' = ')[0]} = {value}", 1)
        refuse = not NUMBER_FIELDS[line](value)
    elif kind == "duplicate":  # the same (period, product) twice
        text += '\n[[demand.request]]\nperiod = 0\nproduct = "AB"\nprobability = 0.1\n'
    elif kind == "negative":
        text = text.replace("probability = 0.4", "probability = -0.2")
    elif kind == "truncate":
        cut = draw(st.integers(10, len(text) - 1))
        text, refuse = text[:cut], False  # a cut may leave a valid (smaller) file
    elif kind == "bom":
        return Case("bom", b"\xef\xbb\xbf" + text.encode(), must_refuse=False)
    elif kind == "id":
        odd = draw(st.sampled_from(["a\\nb", "", " ", "x,y", "A=1", "é", "a\\u0000b"]))
        text = text.replace('"birch-cedar"', f'"{odd}"')
        refuse = odd in ("", "a\\nb", "a\\u0000b")  # empty, or a control character
    elif kind == "unknown":
        text = text.replace("capacity = 2", "capacity = 2\nseats = 4")
    elif kind == "missing":
        text = text.replace("periods = 6\n", "")
    elif kind == "resolve":
        text = text.replace("resolve = 1", f"resolve = {draw(st.sampled_from([-2, 7, 10**9]))}")
    elif kind == "zero":  # all-zero capacities: valid, and no empty mean may warn
        text = text.replace("capacity = 3", "capacity = 0").replace("capacity = 2", "capacity = 0")
        refuse = False
    return Case(f"toml-{kind}", text.encode("utf-8"), must_refuse=refuse)


@st.composite
def benchmark_cases(draw) -> Case:
    """A mutation of :func:`base_benchmark` text."""
    text = base_benchmark()
    lines = text.split("\n")
    kind = draw(st.sampled_from(["probability", "bracket", "cut", "drop", "repeat", "fields",
                                 "periods", "capacity", "none"]))
    refuse = True
    prob_rows = [i for i, line in enumerate(lines) if line[:1].isdigit() and "[" in line]
    row = draw(st.sampled_from(prob_rows))
    if kind == "probability":
        bad = draw(st.sampled_from(["nan", "high", "0.1.2", "-0.1", "1.5", "inf", ""]))
        parts = lines[row].split("\t")
        parts[2] = bad
        lines[row] = "\t".join(parts)
    elif kind == "bracket":
        lines[row] = lines[row].replace("]", "", 1)
    elif kind == "cut":
        body = text.rstrip()
        cut = draw(st.integers(1, len(body) - 1))
        return Case("txt-cut", body[:cut].encode(), suffix=".txt", must_refuse=True)
    elif kind == "drop":
        del lines[row]
    elif kind == "repeat":
        lines.insert(row, lines[row])
    elif kind == "fields":
        target = draw(st.sampled_from([1, 5, 11]))  # the periods line, a leg, a product
        lines[target] += " 99"
    elif kind == "periods":
        lines[1] = draw(st.sampled_from(["-5", "0", str(10**12), "2.5", "x"]))
    elif kind == "capacity":
        lines[5] = "1 0 " + draw(st.sampled_from([str(10**20), "-3", "1e3"]))
    else:
        refuse = False
    return Case(f"txt-{kind}", "\n".join(lines).encode(), suffix=".txt", must_refuse=refuse)


ODD_VALUES = ["abc", "-1", "0", "1", "3", "1.5", str(2**63), str(2**64), "1e30", "", "nan"]


@st.composite
def option_cases(draw) -> Case:
    """The base scenario with one odd option value (every command that has the option)."""
    option = draw(st.sampled_from(["--seed", "--paths", "--period", "--capacity", "--resolve",
                                   "--param"]))
    if option == "--capacity":
        value = draw(st.sampled_from(["-1,2", "1,2", "1", "ash-birch=1,ash-birch=2", "C=1",
                                      "1,1e30", f"{10**30},1", "ash-birch=-1", "a\nb=1"]))
        refuse = value not in ("1,2",)
    elif option == "--param":
        value = draw(st.sampled_from(["samples=-1", "nosuch=1", "=3", "x", "samples=abc"]))
        refuse = True
    else:
        value = draw(st.sampled_from(ODD_VALUES))
        ok = {"--seed": {"0", "1", "3"}, "--paths": {"1", "3"}, "--period": {"0", "1", "3"},
              "--resolve": {"0", "1", "3"}}[option]
        refuse = value not in ok
    return Case(f"option{option}", None, options=(option, value), must_refuse=refuse)


# ---------------------------------------------------------------- running and judging
#: The commands each input meets (small sizes, so a run takes seconds).
COMMANDS = {
    "info": ["info", "{file}"],
    "bound": ["bound", "{file}", "--method", "dlp"],
    "bidprices": ["bidprices", "{file}", "--method", "lr", "--out", "{out}/b.nc"],
    "simulate": ["simulate", "{file}", "--policy", "emsrb", "--paths", "20", "--out",
                 "{out}/s.nc"],
    "compare": ["compare", "{file}", "--methods", "dlp,exact,lr,emsrb", "--paths", "20",
                "--out", "{out}/c.nc"],
}
#: Which options each command takes (a case's options go only where they mean something).
TAKES = {
    "info": set(),
    "bound": {"--seed", "--period", "--capacity", "--param"},
    "bidprices": {"--seed", "--period", "--capacity", "--param"},
    "simulate": {"--seed", "--paths", "--resolve", "--param"},
    "compare": {"--seed", "--paths", "--resolve", "--param"},
}
#: compare names settings METHOD.NAME=VALUE
PARAM_PREFIX = {"compare": "lr."}


@dataclass
class Verdict:
    command: str
    outcome: str  # ok, refused, crash, hang, multiline, leftover, silent
    detail: str = ""


@dataclass
class Tally:
    inputs: int = 0
    runs: int = 0
    counts: dict[str, int] = field(default_factory=dict)
    examples: dict[str, list[str]] = field(default_factory=dict)

    def add(self, case: Case, verdicts: list[Verdict]) -> None:
        self.inputs += 1
        for v in verdicts:
            self.runs += 1
            self.counts[v.outcome] = self.counts.get(v.outcome, 0) + 1
            if v.outcome not in ("ok", "refused"):
                self.examples.setdefault(v.outcome, []).append(
                    f"{case.label} {v.command}: {v.detail[-300:]}")


def _argv(command: str, case: Case, file: Path, out: Path) -> list[str]:
    argv = [a.format(file=file, out=out) for a in COMMANDS[command]]
    if case.options and case.options[0] in TAKES[command]:
        option, value = case.options
        if option == "--param":
            value = PARAM_PREFIX.get(command, "") + value
        argv += [option, value]
    return argv


def run_case(case: Case) -> list[Verdict]:
    """Run every command on the case in a fresh folder (two at a time) and judge each."""
    with tempfile.TemporaryDirectory(prefix="rmkit-fuzz-") as tmp:
        folder = Path(tmp)
        file = folder / f"input{case.suffix}"
        file.write_bytes(BASE_TOML.encode() if case.data is None else case.data)
        env = {**os.environ, "PYTHONPATH": str(ROOT), "PYTHONWARNINGS": "default"}
        outs = {name: folder / f"out-{name}" for name in COMMANDS}
        procs = {}
        for name in COMMANDS:
            outs[name].mkdir()
            procs[name] = subprocess.Popen(
                [sys.executable, "-m", "rmkit", *_argv(name, case, file, outs[name])],
                cwd=outs[name], env=env, stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                text=True, errors="replace")
        return [_judge(name, case, procs[name], outs[name]) for name in COMMANDS]


def _judge(name: str, case: Case, proc: subprocess.Popen, out: Path) -> Verdict:
    try:
        stdout, stderr = proc.communicate(timeout=TIMEOUT)
    except subprocess.TimeoutExpired:
        proc.kill()  # the process this harness started
        proc.communicate()
        return Verdict(name, "hang")
    lines = [line for line in stderr.splitlines() if not line.startswith(f"rmkit {name}: ")]
    if "Traceback" in stderr or proc.returncode not in (0, 2):
        return Verdict(name, "crash", stderr)
    if proc.returncode == 0:
        if case.must_refuse and not _not_applicable(name, case):
            return Verdict(name, "silent", stdout[-200:])
        if "Warning" in stderr or not stdout.strip():
            return Verdict(name, "crash", stderr or "no output")
        return Verdict(name, "ok")
    if list(out.iterdir()):
        return Verdict(name, "leftover", ", ".join(p.name for p in out.iterdir()))
    if len(lines) != 1 or not lines[0].startswith("rmkit: error: "):
        return Verdict(name, "multiline", stderr)
    if "input" not in lines[0] and "--" not in lines[0] and "parameter" not in lines[0]:
        return Verdict(name, "multiline", "names neither the file nor an option: " + lines[0])
    return Verdict(name, "refused")


def _not_applicable(name: str, case: Case) -> bool:
    """An invalid option a command does not take cannot be refused by it."""
    if case.options and case.options[0] not in TAKES[name]:
        return True
    # the [defaults] rules: info reads them too (load-time validation), so nothing is exempt
    return False
