"""Bad scenario files and benchmark text: each refused with one message naming the file, the field
(or line) and the rule, before anything large is allocated."""

from __future__ import annotations

import os
import re
import threading

import numpy as np
import pytest

from rmkit import InputError, ProblemTooLargeError, load_scenario
from rmkit.model.hub_spoke import parse_hub_spoke
from tests.fuzz_inputs import BASE_TOML, base_benchmark


def write(tmp_path, text: str | bytes, name: str = "s.toml"):
    path = tmp_path / name
    path.write_bytes(text if isinstance(text, bytes) else text.encode("utf-8"))
    return path


def refused(path, pattern: str, error: type[Exception] = InputError) -> str:
    with pytest.raises(error) as info:
        load_scenario(path)
    message = str(info.value)
    assert message.startswith(str(path)), message
    assert re.search(pattern, message), message
    assert "\n" not in message
    return message


@pytest.fixture
def little_memory(monkeypatch):
    """Pretend 1 GiB is free, so size refusals do not depend on the machine running the test."""
    monkeypatch.setattr("rmkit.limits.available_memory", lambda: 2**30)


# ---------------------------------------------------------------- the file itself
def test_fifo_is_refused_without_opening_it(tmp_path):
    fifo = tmp_path / "f.toml"
    os.mkfifo(fifo)
    done = []
    reader = threading.Thread(target=lambda: done.append(pytest.raises(InputError, load_scenario,
                                                                      fifo)), daemon=True)
    reader.start()
    reader.join(timeout=20)
    assert done, "load_scenario blocked on a FIFO"
    assert "not a regular file" in str(done[0].value)


def test_folder_and_missing_file(tmp_path):
    refused(tmp_path, "is a folder")
    with pytest.raises(InputError, match="no such file"):
        load_scenario(tmp_path / "nope.toml")


def test_unreadable_file(tmp_path, monkeypatch):
    path = write(tmp_path, BASE_TOML)
    path.chmod(0)
    if os.geteuid() == 0:  # root reads files whatever their mode: let os.access say no
        monkeypatch.setattr("rmkit.files.os.access", lambda p, mode: False)
    refused(path, "permission denied")


def test_byte_order_mark_is_accepted(tmp_path):
    plain = load_scenario(write(tmp_path, BASE_TOML))
    marked = load_scenario(write(tmp_path, b"\xef\xbb\xbf" + BASE_TOML.encode(), "bom.toml"))
    np.testing.assert_array_equal(plain.demand.probabilities, marked.demand.probabilities)
    bench = write(tmp_path, b"\xef\xbb\xbf" + base_benchmark().encode(), "b.txt")
    assert load_scenario(bench).demand.n_periods == 5


# ---------------------------------------------------------------- numbers the arrays cannot hold
@pytest.mark.parametrize(("old", "new", "pattern"), [
    ("capacity = 3", "capacity = 9223372036854775808", r"leg\[0\]\.capacity: must be <="),
    ("capacity = 3", "capacity = 1e30", r"leg\[0\]\.capacity: must be a whole number"),
    ("periods = 6", f"periods = {10**30}", r"demand\.periods: must be <="),
    ("periods = 6", "periods = 0", r"demand\.periods: must be >= 1"),
    ("fare = 100.0", "fare = 1e308", r"product\[0\]\.fare: .*<= 1e\+15"),
    ("probability = 0.4", "probability = -0.2", r"demand\.request\[1\]\.probability: must be >= 0"),
    ("probability = 0.4", "probability = nan", r"demand\.request\[1\]\.probability"),
])
def test_numbers_out_of_range(tmp_path, old, new, pattern):
    refused(write(tmp_path, BASE_TOML.replace(old, new)), pattern)


@pytest.mark.parametrize("odd", ["a\\nb", "a\\u0000b", "a\\tb"])
def test_ids_with_control_characters_are_refused(tmp_path, odd):
    text = BASE_TOML.replace('"birch-cedar"', f'"{odd}"')
    refused(write(tmp_path, text), r"leg\[1\]\.id: must not contain control characters")


def test_huge_tables_are_refused_with_the_estimate(tmp_path, little_memory):
    text = BASE_TOML.replace("periods = 6", "periods = 1000000000")
    message = refused(write(tmp_path, text), r"demand\.periods: 1,000,000,000 periods x 3 products "
                      r"needs about 67\.1 GiB, above the 1 GiB of memory available",
                      ProblemTooLargeError)
    assert "fewer periods" in message


def test_duplicate_requests_name_both_entries(tmp_path):
    text = BASE_TOML + '\n[[demand.request]]\nperiod = 1\nproduct = "AC"\nprobability = -0.1\n'
    refused(write(tmp_path, text), r"request\[4\]\.probability")  # negative: refused by itself
    text = BASE_TOML + '\n[[demand.request]]\nperiod = 1\nproduct = "AC"\nprobability = 0.1\n'
    refused(write(tmp_path, text), r"demand\.request\[4\]: period 1, product 'AC' is already given "
            r"by demand\.request\[1\]")


# ---------------------------------------------------------------- [defaults]
@pytest.mark.parametrize(("old", "new", "pattern"), [
    ("paths = 40", "paths = 0", r"defaults\.paths: must be >= 1, got 0"),
    ("paths = 40", "paths = -10", r"defaults\.paths: must be >= 1"),
    ("resolve = 1", "resolve = -2", r"defaults\.resolve: must be >= 0"),
    ("resolve = 1", "resolve = 1000000000", r"defaults\.resolve: must be at most the number of "
     r"periods \(6\)"),
    ("seed = 7", "seed = -1", r"defaults\.seed: must be >= 0"),
    ("seed = 7", f"seed = {2**63}", r"defaults\.seed: must be <= 9223372036854775807"),
])
def test_defaults_are_checked_when_the_file_loads(tmp_path, old, new, pattern):
    refused(write(tmp_path, BASE_TOML.replace(old, new)), pattern)


def test_defaults_in_range_load(tmp_path):
    text = BASE_TOML.replace("seed = 7", f"seed = {2**63 - 1}").replace("resolve = 1", "resolve = 6")
    scenario = load_scenario(write(tmp_path, text))
    assert scenario.default_seed == 2**63 - 1 and scenario.spec.defaults.resolve == 6


# ---------------------------------------------------------------- benchmark text
def bench_edit(edit) -> str:
    lines = base_benchmark().split("\n")
    edit(lines)
    return "\n".join(lines)


def first_probability(lines: list[str], value: str) -> None:
    row = next(i for i, line in enumerate(lines) if line.startswith("0\t"))
    parts = lines[row].split("\t")
    parts[2] = value
    lines[row] = "\t".join(parts)


PROBABILITY_LINE = 27  # line number (1-based) of period 0 in base_benchmark()


@pytest.mark.parametrize(("edit", "pattern"), [
    (lambda ls: first_probability(ls, "nan"), rf"line {PROBABILITY_LINE}: probability .*'nan'"),
    (lambda ls: first_probability(ls, "high"), rf"line {PROBABILITY_LINE}: probability .*'high'"),
    (lambda ls: first_probability(ls, "0.1.2"), rf"line {PROBABILITY_LINE}: .*'0\.1\.2'"),
    (lambda ls: first_probability(ls, "-0.1"), rf"line {PROBABILITY_LINE}: .*\[0, 1\]"),
    (lambda ls: ls.__setitem__(PROBABILITY_LINE - 1, ls[PROBABILITY_LINE - 1].replace("]", "", 1)),
     rf"line {PROBABILITY_LINE}: expected '\[ origin destination class \] probability'"),
    (lambda ls: ls.__setitem__(1, "200 300"), r"line 2: the number of periods needs exactly 1 field"),
    (lambda ls: ls.__setitem__(1, "-5"), r"line 2: the number of periods: -5 is out of range"),
    (lambda ls: ls.__setitem__(5, "1 0 37 99"), r"line 6: a leg .* needs exactly 3 fields"),
    (lambda ls: ls.__setitem__(5, "1 0 100000000000000000000"), r"line 6: .* out of range"),
    (lambda ls: ls.__setitem__(12, ls[12] + " 3"), r"line 13: a product needs exactly 4 fields"),
    (lambda ls: ls.__delitem__(PROBABILITY_LINE + 1),
     r"one probability line per period \(5\), found 4; period 2 is missing"),
    (lambda ls: ls.insert(PROBABILITY_LINE, ls[PROBABILITY_LINE - 1]),
     rf"line {PROBABILITY_LINE + 1}: period 0 is listed again \(first on line {PROBABILITY_LINE}\)"),
    (lambda ls: ls.__setitem__(PROBABILITY_LINE - 1, ls[PROBABILITY_LINE - 1].rsplit("\t[", 1)[0]),
     rf"line {PROBABILITY_LINE}: period 0 lists 11 of the 12 products; \[ 2 1 1 \] is missing"),
])
def test_benchmark_text_checks_every_count(edit, pattern):
    with pytest.raises(InputError, match=pattern):
        parse_hub_spoke(bench_edit(edit))


def test_benchmark_text_cut_short_is_refused():
    text = base_benchmark()
    for fraction in (0.3, 0.6, 0.9, 0.99):
        with pytest.raises(InputError):
            parse_hub_spoke(text[: int(len(text) * fraction)])


def test_benchmark_huge_periods_refused_with_the_estimate(little_memory):
    with pytest.raises(ProblemTooLargeError, match=r"line 2: the number of periods: "
                       r"1,000,000,000,000 periods x 12 products needs about"):
        parse_hub_spoke(bench_edit(lambda ls: ls.__setitem__(1, str(10**12))))


def test_base_benchmark_reads_as_written():
    network, demand = parse_hub_spoke(base_benchmark())
    assert network.n_legs == 4 and network.n_products == 12 and demand.n_periods == 5
    assert demand.probabilities[0, 0] == pytest.approx(0.05)
