"""A progress bar with the time left, on stderr, only where a person watches it.

Shown when stderr is a terminal, and neither ``--json`` nor ``--quiet`` is given; nothing at
all otherwise (logs and pipes stay clean). The first numba compilation of a run is announced
on the same console ("compiling kernels, once per install").
"""

from __future__ import annotations

import sys
from collections.abc import Iterator
from contextlib import contextmanager

from rmkit.workflows.progress import Progress

COMPILING = "compiling kernels, once per install (cached afterwards; about a minute)"


def wanted(args) -> bool:
    return not (getattr(args, "json", False) or getattr(args, "quiet", False)) and (
        sys.stderr.isatty())


@contextmanager
def progress_bar(command: str, args, *, bounded: bool = True) -> Iterator[Progress | None]:
    """A ``progress(what, done, total)`` callback drawing a rich bar, or None when not shown.

    ``bounded=False`` draws a spinner with the elapsed time (work of unknown length)."""
    from rmkit.workflows.compiling import CompileWatch, on_first_compile

    if not wanted(args):
        yield None
        return
    from rich.console import Console
    from rich.progress import (
        BarColumn,
        SpinnerColumn,
        TaskProgressColumn,
        TextColumn,
        TimeElapsedColumn,
        TimeRemainingColumn,
    )
    from rich.progress import (
        Progress as Bar,
    )

    console = Console(stderr=True)
    columns = [SpinnerColumn(), TextColumn(f"rmkit {command}: " + "{task.description}")]
    if bounded:
        columns += [BarColumn(), TaskProgressColumn(), TextColumn("left"), TimeRemainingColumn()]
    columns.append(TimeElapsedColumn())
    with Bar(*columns, console=console, transient=True) as bar, CompileWatch():
        task = bar.add_task("starting", total=1.0 if bounded else None)
        on_first_compile(lambda: bar.console.print(f"rmkit {command}: {COMPILING}"))

        def update(what: str, done: float, total: float) -> None:
            if bounded and total:
                bar.update(task, description=what, completed=min(done / total, 1.0))
            else:
                bar.update(task, description=what)

        try:
            yield update
        finally:
            on_first_compile(None)
