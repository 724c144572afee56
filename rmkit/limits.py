"""The ranges every count and seed must lie in, and the memory check made before allocating.

Whole numbers from files and options (capacities, periods, paths, seeds) are checked here, at the
edge, so nothing past it meets a number that does not fit its array (``int64`` overflow, a float
that is no longer exact) or a table larger than the machine. Messages name the field and follow
the package template: ``field: must be ..., got ...``.

>>> whole_number(3, "paths", low=1)
3
>>> check_seed(2**63, "seed")
Traceback (most recent call last):
...
rmkit.errors.InputError: seed: must be a whole number in [0, 9223372036854775807], got 9223372036854775808
"""

from __future__ import annotations

import math
from typing import Any

from rmkit.errors import InputError, ProblemTooLargeError

#: Largest whole number a count may take: float64 holds every integer up to 2**53 exactly, and
#: the LP methods read capacities and periods as floats.
MAX_COUNT = 2**53
#: Seeds are stored as int64 in result files and feed numpy's SeedSequence: [0, 2**63 - 1].
MAX_SEED = 2**63 - 1
#: Largest fare: HiGHS reads numbers from 1e20 up as infinite, and a fare times the seats of a
#: leg must stay below that.
MAX_FARE = 1e15
#: Memory a single run may plan for when nothing else says: at most this share of what is free.
AVAILABLE_SHARE = 0.9


def is_whole(value: Any) -> bool:
    """A Python or numpy integer (not a bool)."""
    import numpy as np

    return isinstance(value, (int, np.integer)) and not isinstance(value, bool)


def whole_number(value: Any, field: str, *, low: int = 0, high: int = MAX_COUNT) -> int:
    """``value`` as an int when it is a whole number in ``[low, high]``, else :class:`InputError`."""
    if not is_whole(value) or not low <= value <= high:
        raise InputError(f"{field}: must be {whole_rule(low, high)}, got {value!r}")
    return int(value)


def whole_rule(low: int, high: int = MAX_COUNT) -> str:
    """The rule of :func:`whole_number` in words (also used by argparse and pydantic messages)."""
    return f"a whole number >= {low}" if high == MAX_COUNT else f"a whole number in [{low}, {high}]"


def check_seed(value: Any, field: str = "seed") -> int:
    """A seed in ``[0, MAX_SEED]``: what numpy accepts and what a NetCDF int64 attribute holds."""
    return whole_number(value, field, low=0, high=MAX_SEED)


# ---------------------------------------------------------------- memory
def gib(n_bytes: float) -> str:
    """Bytes as GiB, TiB, ... with three significant digits."""
    value, unit = n_bytes / 2**30, "GiB"
    for bigger in ("TiB", "PiB", "EiB"):
        if value < 1024:
            break
        value, unit = value / 1024, bigger
    return f"{value:.3g} {unit}"


def available_memory() -> int | None:
    """Bytes of memory available to a new allocation now (psutil, else /proc/meminfo), or None."""
    try:
        import psutil

        return int(psutil.virtual_memory().available)
    except ImportError:  # pragma: no cover - psutil comes with dask.distributed
        pass
    try:
        with open("/proc/meminfo", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("MemAvailable:"):
                    return int(line.split()[1]) * 1024
    except OSError:  # pragma: no cover - not Linux
        return None
    return None  # pragma: no cover


def memory_refusal(n_bytes: float, what: str, limit: float | None = None,
                   limit_name: str = "") -> str | None:
    """Why an allocation of ``n_bytes`` for ``what`` must not start (above ``limit`` bytes, or
    above the memory available now), with both numbers; ``None`` when it fits."""
    if not math.isfinite(n_bytes):
        return f"{what} is too large to count"
    if limit is not None and n_bytes > limit:
        name = f" ({limit_name})" if limit_name else ""
        return f"{what} needs about {gib(n_bytes)}, above the limit of {gib(limit)}{name}"
    free = available_memory()
    if free is not None and n_bytes > AVAILABLE_SHARE * free:
        return f"{what} needs about {gib(n_bytes)}, above the {gib(free)} of memory available"
    return None


def check_memory(n_bytes: float, what: str, field: str, limit: float | None = None,
                 limit_name: str = "", advice: str = "") -> None:
    """Raise :class:`ProblemTooLargeError` naming ``field`` when :func:`memory_refusal` refuses."""
    reason = memory_refusal(n_bytes, what, limit, limit_name)
    if reason is not None:
        raise ProblemTooLargeError(f"{field}: {reason}" + (f"; {advice}" if advice else ""))
