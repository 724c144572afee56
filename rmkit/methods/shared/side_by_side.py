"""Independent pieces of work run side by side in Python threads, results in input order.

Re-solve rounds of a simulation hold many independent solves; where a solve spends its time
without the GIL (HiGHS, numba kernels compiled ``nogil``), threads put both cores to work with no
copy of the problem and no change to any number. The thread count is numba's for the calling
thread: one per core unless ``NUMBA_NUM_THREADS`` or ``numba.set_num_threads`` says less.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import Any, TypeVar

T = TypeVar("T")


def side_by_side(work: Callable[[T], Any], items: Sequence[T]) -> list[Any]:
    """``[work(item) for item in items]``, in that order, over numba's thread count of threads.

    An exception in one piece of work (or Ctrl-C) is raised here, as the serial loop would raise
    it, once the pieces already running have finished; ``Executor.map`` cancels the pieces not
    started, so a round of hundreds of solves does not run on after an error."""
    import numba

    threads = min(numba.get_num_threads(), len(items))
    if threads <= 1:
        return [work(item) for item in items]
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(threads, thread_name_prefix="rmkit-solve") as pool:
        return list(pool.map(work, items))
