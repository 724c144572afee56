from __future__ import annotations

import os
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
#: The 48 public hub-and-spoke problems, shipped with the package (rmkit/data/hub-spoke).
DATA = HUB_SPOKE = ROOT / "rmkit" / "data" / "hub-spoke"
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


def instance_path(name: str) -> Path:
    """A public benchmark problem (shipped with rmkit, so every clone has them all)."""
    return vendored(name)


def shared_names(periods: int | None = None) -> list[str]:
    names = sorted(p.name[: -len(".txt.gz")] for p in HUB_SPOKE.glob("rm_*.txt.gz"))
    if periods is not None:
        names = [n for n in names if n.startswith(f"rm_{periods}_")]
    return names
