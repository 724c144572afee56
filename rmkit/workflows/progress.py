"""Progress reports of long work: ``progress(what, done, total)`` callbacks.

Workflows call the callback with what they are doing and how far they are (in any unit);
the command line turns it into a progress bar with the time left. :func:`part` maps the
progress of one step onto its share of a longer run.
"""

from __future__ import annotations

from collections.abc import Callable

Progress = Callable[[str, float, float], None]


def part(progress: Progress | None, label: str, index: int, count: int) -> Progress | None:
    """The progress of step ``index`` of ``count`` as the whole run's progress."""
    if progress is None:
        return None

    def report(what: str, done: float, total: float) -> None:
        share = done / total if total else 0.0
        progress(label or what, index + min(max(share, 0.0), 1.0), count)

    return report
