"""Where a result came from: the scenario (its sha256 and a copy), the versions of rmkit and the
libraries it computed with, the platform and a UTC timestamp.

Results themselves stay deterministic (same inputs and seed, same numbers and attrs); the
command line adds this record to what it writes and prints (NetCDF attrs, ``--json``).
"""

from __future__ import annotations

import datetime as _dt
import gzip
import hashlib
import json
import platform
from importlib import metadata
from pathlib import Path
from typing import Any

#: Distributions whose versions a result records.
LIBRARIES = ("rmkit", "numpy", "scipy", "highspy", "numba", "xarray")


def versions() -> dict[str, str]:
    out = {}
    for name in LIBRARIES:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            out[name] = "not installed"
    return out


def scenario_files(source: str | Path) -> list[Path]:
    """The files a scenario was read from: the file itself, plus the CSV files a scenario
    TOML names in its ``[csv]`` table."""
    path = Path(source)
    files = [path]
    if path.suffix.lower() == ".toml":
        import tomllib

        try:
            table = tomllib.loads(path.read_text(encoding="utf-8")).get("csv", {})
        except (OSError, tomllib.TOMLDecodeError, UnicodeDecodeError):
            table = {}
        for key in ("legs", "products", "forecast"):
            if isinstance(table.get(key), str):
                files.append(path.parent / table[key])
    return files


def _text(path: Path) -> str:
    raw = path.read_bytes()
    if path.name.lower().endswith(".gz"):
        raw = gzip.decompress(raw)
    return raw.decode("utf-8", errors="replace")


def provenance(scenario: Any) -> dict[str, Any]:
    """The record for a loaded scenario (read from ``scenario.source``)."""
    source = str(getattr(scenario, "source", "") or "")
    record: dict[str, Any] = {"scenario": getattr(scenario, "name", ""), "scenario_file": source}
    files = [p for p in scenario_files(source) if p.is_file()] if source else []
    if files:
        digest = hashlib.sha256()
        copies = []
        for p in files:
            digest.update(p.read_bytes())
            copies.append(_text(p) if len(files) == 1 else f"# ---- {p.name}\n{_text(p)}")
        record["scenario_sha256"] = digest.hexdigest()
        record["scenario_copy"] = "\n".join(copies)
    else:  # built in code: the scenario as rmkit would write it
        import tomli_w

        from rmkit.model.scenario import scenario_to_dict

        text = tomli_w.dumps(_drop_none(scenario_to_dict(scenario)))
        record["scenario_sha256"] = hashlib.sha256(text.encode()).hexdigest()
        record["scenario_copy"] = text
    record["versions"] = versions()
    record["platform"] = platform.platform()
    record["python"] = platform.python_version()
    record["created_utc"] = _dt.datetime.now(_dt.UTC).strftime("%Y-%m-%dT%H:%M:%SZ")
    return record


def _drop_none(d: Any) -> Any:
    if isinstance(d, dict):
        return {k: _drop_none(v) for k, v in d.items() if v is not None}
    if isinstance(d, list):
        return [_drop_none(v) for v in d]
    return d


def as_attrs(record: dict[str, Any]) -> dict[str, str]:
    """The record as NetCDF attrs (strings; versions as JSON)."""
    return {("scenario_name" if k == "scenario" else k):
            (json.dumps(v, sort_keys=True) if isinstance(v, dict) else str(v))
            for k, v in record.items()}
