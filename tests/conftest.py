from __future__ import annotations

import os
from pathlib import Path

import pytest

DATA = Path(__file__).parent / "data"
SHARED = Path(__file__).resolve().parents[1].parent / "shared"
HUB_SPOKE = SHARED / "benchmarks" / "hub-spoke"
ROOT = Path(__file__).resolve().parents[1]
EXAMPLE = ROOT / "rmkit" / "examples" / "tallowmere.toml"

# hypothesis: fewer examples on CI keeps the suite within its time budget without changing what
# each property asserts.
try:
    from hypothesis import HealthCheck, settings

    settings.register_profile(
        "rmkit", max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow]
    )
    settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "rmkit"))
except ImportError:  # pragma: no cover
    pass


def vendored(name: str) -> Path:
    return DATA / f"{name}.txt.gz"


def shared_instance(name: str) -> Path:
    path = HUB_SPOKE / f"{name}.txt.gz"
    if not path.exists():
        pytest.skip(f"../shared is absent: {path}")
    return path


def instance_path(name: str) -> Path:
    """A benchmark instance: vendored copy if there is one, else ../shared (skip if absent)."""
    v = vendored(name)
    return v if v.exists() else shared_instance(name)


def shared_names(periods: int | None = None) -> list[str]:
    names = sorted(p.name[: -len(".txt.gz")] for p in HUB_SPOKE.glob("rm_*.txt.gz"))
    if periods is not None:
        names = [n for n in names if n.startswith(f"rm_{periods}_")]
    return names
