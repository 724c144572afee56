"""Sweep grid files: scenarios x methods (values and simulated policies) x seeds.

Layout (TOML; unknown keys are refused): see the package docstring of :mod:`rmkit.workflows.sweep`.
"""

from __future__ import annotations

import glob
import itertools
import os
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from pydantic import BaseModel, ConfigDict, ValidationError

from rmkit.errors import InputError
from rmkit.limits import MAX_SEED


class _Strict(BaseModel):
    model_config = ConfigDict(extra="forbid", strict=True, frozen=True)


class SweepInfo(_Strict):
    name: str = ""
    seeds: int | list[int] = [0]


class ScenarioEntry(_Strict):
    files: list[str] | None = None
    generator: str | None = None
    settings: dict[str, Any] = {}
    prefix: str = ""


class MethodEntry(_Strict):
    method: str
    params: dict[str, Any] = {}
    label: str = ""


class PolicyEntry(_Strict):
    method: str
    paths: int = 1000
    resolves: int | list[int] = 0
    params: dict[str, Any] = {}
    label: str = ""


class GridSpec(_Strict):
    sweep: SweepInfo = SweepInfo()
    scenario: list[ScenarioEntry]
    method: list[MethodEntry] = []
    policy: list[PolicyEntry] = []


def _grid_error(err: ValidationError) -> InputError:
    first = err.errors()[0]
    where = ""
    for part in first["loc"]:
        where += f"[{part}]" if isinstance(part, int) else ("." if where else "") + str(part)
    if first["type"] == "extra_forbidden":
        return InputError(f"grid {where}: unknown field; see the grid layout in the README (Sweeps)")
    if first["type"] == "missing":
        return InputError(f"grid {where}: is required but missing")
    return InputError(f"grid {where}: {first['msg'].lower()}, got {first.get('input')!r}")


@dataclass(frozen=True)
class MethodSpec:
    """One value of the ``method`` coordinate: a solver's value, or a simulated policy."""

    label: str
    kind: str  # "value" (solve once, record its value) or "policy" (simulate the control)
    method: str
    params: dict[str, Any] = field(default_factory=dict)
    paths: int = 0
    resolve: int = 0


@dataclass(frozen=True)
class ScenarioRef:
    """Where a scenario comes from: a file, or a generator family with settings."""

    label: str
    file: str = ""
    generator: str = ""
    settings: dict[str, Any] = field(default_factory=dict)

    def load(self):
        if self.file:
            from rmkit.model.scenario import load_scenario

            return load_scenario(self.file)
        from rmkit.model.families import generate

        return generate(self.generator, **self.settings)


@dataclass(frozen=True)
class Grid:
    """An expanded grid: ordered coordinate labels and what each label stands for."""

    name: str
    scenarios: tuple[ScenarioRef, ...]
    methods: tuple[MethodSpec, ...]
    seeds: tuple[int, ...]

    @property
    def n_cells(self) -> int:
        return len(self.scenarios) * len(self.methods) * len(self.seeds)


def _unique(labels: list[str], what: str, fix: str) -> None:
    seen: set[str] = set()
    for label in labels:
        if label in seen:
            raise InputError(f"grid {what}: two entries are labelled {label!r}; {fix}")
        seen.add(label)


def _file_label(path: str) -> str:
    name = Path(path).name
    for suffix in (".gz", ".txt", ".toml"):
        if name.lower().endswith(suffix):
            name = name[: -len(suffix)]
    return name


def _expand_scenarios(spec: GridSpec, folder: Path) -> list[ScenarioRef]:
    from rmkit.model.families import GENERATORS

    out: list[ScenarioRef] = []
    for i, entry in enumerate(spec.scenario):
        where = f"scenario[{i}]"
        if (entry.files is None) == (entry.generator is None):
            raise InputError(f"grid {where}: give exactly one of 'files' or 'generator'")
        if entry.files is not None:
            if entry.settings:
                raise InputError(f"grid {where}.settings: only generator entries take settings")
            if not entry.files:
                raise InputError(f"grid {where}.files: list at least one path or glob")
            for j, pattern in enumerate(entry.files):
                full = pattern if os.path.isabs(pattern) else str(folder / pattern)
                found = sorted(glob.glob(full))
                if not found:
                    raise InputError(
                        f"grid {where}.files[{j}]: {pattern!r} matches no file (looked in {folder})"
                    )
                out.extend(
                    ScenarioRef(label=entry.prefix + _file_label(p), file=str(Path(p).resolve()))
                    for p in found
                )
            continue
        if entry.generator not in GENERATORS:
            raise InputError(
                f"grid {where}.generator: unknown family {entry.generator!r}; "
                f"valid: {', '.join(GENERATORS)}"
            )
        keys = sorted(entry.settings)
        axes = [v if isinstance(v, list) and k != "fares" else [v]
                for k, v in ((k, entry.settings[k]) for k in keys)]
        for combo in itertools.product(*axes):
            settings = dict(zip(keys, combo, strict=True))
            scenario = ScenarioRef(label="", generator=entry.generator, settings=settings).load()
            out.append(ScenarioRef(label=entry.prefix + scenario.name, generator=entry.generator,
                                   settings=settings))
    _unique([s.label for s in out], "scenario", "set a distinct 'prefix' on the [[scenario]] entries")
    return out


def _expand_methods(spec: GridSpec) -> list[MethodSpec]:
    from rmkit.methods.base import get_solver

    out: list[MethodSpec] = []
    for m in spec.method:
        get_solver(m.method, **m.params)  # unknown method or parameter name fails here, not later
        out.append(MethodSpec(label=m.label or m.method, kind="value", method=m.method,
                              params=dict(m.params)))
    for i, p in enumerate(spec.policy):
        where = f"policy[{i}]"
        try:
            from rmkit.workflows.policies import make_policy
        except ImportError:  # pragma: no cover - the simulator ships with rmkit
            raise InputError(f"grid {where}: this rmkit has no policy simulator") from None
        make_policy(p.method, dict(p.params))  # unknown policy or setting fails here
        if p.paths < 1:
            raise InputError(f"grid {where}.paths: must be >= 1, got {p.paths}")
        resolves = p.resolves if isinstance(p.resolves, list) else [p.resolves]
        if not resolves or any(r < 0 for r in resolves):
            raise InputError(f"grid {where}.resolves: give whole numbers >= 0, got {p.resolves!r}")
        if p.label and len(resolves) > 1:
            raise InputError(f"grid {where}.label: one label cannot name {len(resolves)} resolves")
        for r in resolves:
            label = p.label or (f"{p.method}-policy" + (f"-r{r}" if r else ""))
            out.append(MethodSpec(label=label, kind="policy", method=p.method, params=dict(p.params),
                                  paths=p.paths, resolve=r))
    if not out:
        raise InputError("grid: lists no [[method]] and no [[policy]]; add at least one")
    _unique([m.label for m in out], "method", "set a distinct 'label' on the entries")
    return out


def grid_from_dict(data: dict[str, Any], folder: str | Path = ".") -> Grid:
    """Validate a grid (the parsed TOML) and expand it; paths are relative to ``folder``."""
    try:
        spec = GridSpec.model_validate(data)
    except ValidationError as err:
        raise _grid_error(err) from None
    seeds = spec.sweep.seeds
    if isinstance(seeds, int):
        from rmkit.limits import check_memory

        # every cell is an object in memory and a file in the store: refuse a count before
        # expanding it (about a kilobyte per seed and cell)
        check_memory(1024 * max(seeds, 0), f"{seeds:,} seeds", "grid sweep.seeds")
        seeds = list(range(seeds))
    else:
        seeds = list(seeds)
    if any(s > MAX_SEED for s in seeds):
        raise InputError(f"grid sweep.seeds: seeds must be whole numbers in [0, {MAX_SEED}], got "
                         f"{max(seeds)}")
    if not seeds or any(s < 0 for s in seeds):
        raise InputError(f"grid sweep.seeds: give a count >= 1 or whole numbers >= 0, got {seeds!r}")
    if len(set(seeds)) != len(seeds):
        raise InputError(f"grid sweep.seeds: seeds repeat in {seeds!r}")
    return Grid(
        name=spec.sweep.name,
        scenarios=tuple(_expand_scenarios(spec, Path(folder))),
        methods=tuple(_expand_methods(spec)),
        seeds=tuple(int(s) for s in seeds),
    )


def load_grid(path: str | Path) -> Grid:
    """Read and expand a grid file (see the module docstring for its layout)."""
    from rmkit.files import check_input, read_text

    p = check_input(path, "sweep grid .toml")
    try:
        data = tomllib.loads(read_text(p, "sweep grid .toml"))
    except InputError as err:
        raise InputError(f"{p}: {err}") from None
    except tomllib.TOMLDecodeError as err:
        raise InputError(f"{p}: malformed TOML: {err}") from None
    grid = grid_from_dict(data, p.resolve().parent)
    return grid if grid.name else Grid(p.stem, grid.scenarios, grid.methods, grid.seeds)
