"""Generated bad input through the real command line (see tests/fuzz_inputs.py for the judge).

Every generated scenario TOML, benchmark text and option value is given to info, bound,
bidprices, simulate and compare as subprocesses; each run must end as the README promises: exit 0
with output, or one line naming the file or option, exit 2, no traceback and nothing written.

The default run is small and seeded (a fixed hypothesis seed, a few examples of each kind). A
longer run on request: ``RMKIT_FUZZ_EXAMPLES=200 pytest tests/test_fuzz_inputs.py``; with
``RMKIT_FUZZ_REPORT=FILE`` the counts of every outcome are written to FILE as JSON.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, seed, settings

from tests.fuzz_inputs import Tally, benchmark_cases, option_cases, run_case, scenario_cases

EXAMPLES = int(os.environ.get("RMKIT_FUZZ_EXAMPLES", "0"))
REPORT = os.environ.get("RMKIT_FUZZ_REPORT", "")
TALLY = Tally()


def fuzz_settings(default: int):
    return settings(max_examples=EXAMPLES or default, deadline=None, database=None,
                    derandomize=not EXAMPLES,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])


def check(case) -> None:
    verdicts = run_case(case)
    TALLY.add(case, verdicts)
    if REPORT:  # a counting run records every outcome and goes on
        Path(REPORT).write_text(json.dumps({"inputs": TALLY.inputs, "runs": TALLY.runs,
                                            "counts": TALLY.counts,
                                            "examples": TALLY.examples}, indent=1))
        return
    # "silent" (exit 0 on input a mutation made invalid) counts as bad like a crash or a hang
    bad = [v for v in verdicts if v.outcome not in ("ok", "refused")]
    assert not bad, (case, bad)


@pytest.mark.fuzz
@seed(17)
@fuzz_settings(8)
@given(scenario_cases())
def test_generated_scenario_files(case):
    check(case)


@pytest.mark.fuzz
@seed(18)
@fuzz_settings(6)
@given(benchmark_cases())
def test_generated_benchmark_text(case):
    check(case)


@pytest.mark.fuzz
@seed(19)
@fuzz_settings(6)
@given(option_cases())
def test_generated_option_values(case):
    check(case)
