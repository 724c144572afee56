"""One set of run defaults for every command and workflow: paths, re-solves and seed.

Where a setting is not given, it comes from the scenario's ``[defaults]`` table; where that is
silent, from one documented value per setting:

* ``paths`` (simulated request streams per policy): :data:`PATHS`;
* ``resolve`` (re-optimisations at equally spaced periods): :data:`RESOLVE`, except on the public
  hub-and-spoke benchmark files, where it is :data:`BENCHMARK_RESOLVE` (the published protocol,
  Topaloglu 2009, re-solves every policy 5 times over the horizon);
* ``seed``: :data:`SEED`.

:func:`run_settings` returns the values in force and where each came from, so reports can state
them and never depend on something the reader cannot see.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

PATHS = 1000
RESOLVE = 0
BENCHMARK_RESOLVE = 5
SEED = 0

#: The rule of each default in words (for --help and the README).
RULES = {
    "paths": f"the scenario's [defaults] paths, else {PATHS}",
    "resolve": (f"the scenario's [defaults] resolve, else {BENCHMARK_RESOLVE} on benchmark files "
                f"(the published protocol) and {RESOLVE} otherwise"),
    "seed": f"the scenario's [defaults] seed, else {SEED}",
}


@dataclass(frozen=True)
class RunSettings:
    """The values in force, and where each came from (``option``, ``scenario`` or ``default``)."""

    paths: int
    resolve: int
    seed: int
    sources: dict[str, str]

    def header(self) -> str:
        """``1000 paths, 5 re-solves, seed 7`` plus the source of the defaulted ones."""
        by = {}
        for name, source in self.sources.items():
            if source != "option":
                by.setdefault(source, []).append(name)
        notes = [f"{', '.join(names)} from {_SOURCE_WORDS[src]}" for src, names in by.items()]
        text = f"{self.paths:,} paths, {self.resolve} re-solves, seed {self.seed}"
        return text + (f" ({'; '.join(notes)})" if notes else "")

    def as_dict(self) -> dict[str, Any]:
        return {"paths": self.paths, "resolve": self.resolve, "seed": self.seed,
                "defaults_from": dict(self.sources)}


_SOURCE_WORDS = {"scenario": "the scenario's [defaults]", "default": "rmkit's defaults",
                 "benchmark": "the benchmark protocol"}


def is_benchmark(scenario: Any) -> bool:
    """Whether the scenario was read from a public hub-and-spoke benchmark file."""
    return str(getattr(scenario, "source", "")).lower().endswith((".txt", ".txt.gz"))


def run_settings(scenario: Any, *, paths: int | None = None, resolve: int | None = None,
                 seed: int | None = None) -> RunSettings:
    """The paths, re-solves and seed in force for ``scenario`` (given values win)."""
    spec = getattr(scenario, "spec", None)
    given = spec.defaults if spec is not None else None
    sources: dict[str, str] = {}

    def pick(name: str, value: int | None, fallback: int, fallback_source: str) -> int:
        if value is not None:
            sources[name] = "option"
            return value
        from_file = getattr(given, name, None) if given is not None else None
        if from_file is not None:
            sources[name] = "scenario"
            return int(from_file)
        sources[name] = fallback_source
        return fallback

    bench = is_benchmark(scenario)
    return RunSettings(
        paths=pick("paths", paths, PATHS, "default"),
        resolve=pick("resolve", resolve, BENCHMARK_RESOLVE if bench else RESOLVE,
                     "benchmark" if bench else "default"),
        seed=pick("seed", seed, SEED, "default"),
        sources=sources,
    )
