"""Scratch arrays a thread reuses from one solve to the next.

A simulator's re-solve round runs hundreds of solves of one method, each allocating the same
large working arrays (lr: six ``(legs, periods, products)`` arrays, 5.5 MB each on a
600-period, 16-leg, 144-product network at mid-horizon). Memory that large comes fresh from the
operating system each time, and on the machines this project runs on the first touch of each
page costs about 0.8 ms per MB, more when the threads of a round take those faults together.
Reused memory is already mapped. Arrays are zeroed or copied into before use, so no number changes.

Each thread keeps its own arrays (a round's threads are its own), one per name, grown to the
largest size asked for. :func:`borrowed` hands them out for the length of one solve; a solve
started inside another on the same thread gets fresh arrays, so nothing it uses is shared.
"""

from __future__ import annotations

import math
import threading
from collections.abc import Iterator
from contextlib import contextmanager

import numpy as np

_local = threading.local()
#: Bytes one thread keeps at most; an array beyond that is allocated afresh, not kept.
MAX_KEPT_BYTES = 256 * 2**20


class Workspace:
    """Named float64 scratch arrays, reused while :attr:`reuse` is set."""

    def __init__(self, reuse: bool) -> None:
        self.reuse = reuse
        self._flat: dict[str, np.ndarray] = {}

    def empty(self, name: str, shape: tuple[int, ...]) -> np.ndarray:
        """A C-ordered array of ``shape`` with arbitrary contents."""
        size = math.prod(shape)
        if not self.reuse:
            return np.empty(shape)
        flat = self._flat.get(name)
        if flat is None or flat.size < size:
            kept = sum(a.nbytes for key, a in self._flat.items() if key != name)
            if kept + 8 * size > MAX_KEPT_BYTES:
                return np.empty(shape)
            flat = np.empty(size)
            self._flat[name] = flat
        return flat[:size].reshape(shape)

    def zeros(self, name: str, shape: tuple[int, ...]) -> np.ndarray:
        out = self.empty(name, shape)
        out.fill(0.0)
        return out

    def copy_of(self, name: str, a: np.ndarray) -> np.ndarray:
        out = self.empty(name, a.shape)
        np.copyto(out, a)
        return out


@contextmanager
def borrowed() -> Iterator[Workspace]:
    """This thread's workspace for one solve; arrays taken from it must not outlive the block
    (copy what a result keeps)."""
    mine = getattr(_local, "workspace", None)
    if mine is None:
        mine = _local.workspace = Workspace(reuse=True)
    if getattr(_local, "busy", False):  # a solve inside a solve: fresh arrays
        yield Workspace(reuse=False)
        return
    _local.busy = True
    try:
        yield mine
    finally:
        _local.busy = False
