"""matplotlib with the Agg back end (files, no display), and saving a figure: shared by every
figure module (:mod:`.figures`, :mod:`.plots`, :mod:`.sweep.gaps`) and importing none of them."""

from __future__ import annotations

from pathlib import Path
from typing import Any


def pyplot():
    """``matplotlib.pyplot`` on the Agg back end."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    return plt


def save(fig: Any, path: str | Path | None, dpi: int) -> Any:
    """Write ``fig`` to ``path`` as PNG when a path is given, release it, and return it."""
    if path is not None:
        fig.savefig(path, dpi=dpi, format="png")
    pyplot().close(fig)
    return fig
