"""The public hub-and-spoke test problems shipped with rmkit (``rmkit/data/hub-spoke``).

Source: H. Topaloglu (2009), "Using Lagrangian relaxation to compute capacity-dependent bid prices
in network revenue management", Operations Research 57(3):637-649. See the README in that folder.
"""

from __future__ import annotations

import re
from importlib import resources
from pathlib import Path

_NAME = re.compile(r"^rm_\d+_\d+_\d+(?:\.\d+)?_\d+(?:\.\d+)?$")


def data_folder() -> Path:
    return Path(str(resources.files("rmkit") / "data" / "hub-spoke"))


def instance_names() -> list[str]:
    """Names of the shipped problems, e.g. ``rm_200_4_1.0_4.0``."""
    return sorted(p.name[: -len(".txt.gz")] for p in data_folder().glob("rm_*.txt.gz"))


def instance_path(name: str | Path) -> Path | None:
    """The shipped file of a problem given by its name (``rm_200_4_1.0_4.0``, with or without
    ``.txt.gz``), or None when ``name`` is not one of them."""
    stem = Path(name).name
    for suffix in (".gz", ".txt"):
        stem = stem.removesuffix(suffix)
    if str(Path(name).parent) not in ("", ".") or not _NAME.match(stem):
        return None
    path = data_folder() / f"{stem}.txt.gz"
    return path if path.is_file() else None
