"""Time numba spends compiling kernels, so it can be announced and kept out of method timings.

rmkit's kernels are compiled on first use and cached on disk (once per install). numba
broadcasts a ``numba:compile`` event around every real compilation (a cache load is not one),
so :class:`CompileWatch` can tell the user when compiling starts and report the seconds spent.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from typing import Any

#: Called once per process, when the first compilation starts (the command line says so).
_notice: list[Callable[[], None]] = []
_announced = False


def on_first_compile(callback: Callable[[], None] | None) -> None:
    """Call ``callback`` when numba starts compiling for the first time in this process."""
    _notice.clear()
    if callback is not None:
        _notice.append(callback)


class CompileWatch:
    """Seconds of top-level numba compilation inside a ``with`` block (nested compiles of the
    functions a kernel calls count once)."""

    def __init__(self) -> None:
        self.seconds = 0.0
        self._depth = 0
        self._start = 0.0
        self._listener: Any = None

    def __enter__(self) -> CompileWatch:
        from numba.core import event

        watch = self

        class _Listener(event.Listener):
            def on_start(self, ev: Any) -> None:
                watch._started()

            def on_end(self, ev: Any) -> None:
                watch._ended()

        self._listener = _Listener()
        event.register("numba:compile", self._listener)
        return self

    def __exit__(self, *exc: object) -> None:
        from numba.core import event

        event.unregister("numba:compile", self._listener)

    def _started(self) -> None:
        global _announced
        if self._depth == 0:
            self._start = time.perf_counter()
            if not _announced and _notice:
                _announced = True
                _notice[0]()
        self._depth += 1

    def _ended(self) -> None:
        self._depth -= 1
        if self._depth == 0:
            self.seconds += time.perf_counter() - self._start
