"""Solver warnings summarised once per method and run, with the details kept in attrs.

A long run can raise the same warning hundreds of times (a re-solved method that stops at its
iteration limit in many states). Workflows record them (:func:`recorded`), keep a count per
distinct message in the result's ``warnings`` attr (:func:`as_attr`) and report one line per
method (:func:`summary`); the command line prints that line once.
"""

from __future__ import annotations

import json
import re
import warnings
from collections import Counter
from collections.abc import Iterator, Sequence
from contextlib import contextmanager


@contextmanager
def recorded() -> Iterator[list[str]]:
    """Collect the first line of every warning raised inside the block, in order."""
    messages: list[str] = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            yield messages
        finally:
            messages.extend(str(w.message).splitlines()[0] for w in caught)


def counts(messages: Sequence[str]) -> dict[str, int]:
    """Distinct messages with how often each came, most frequent first."""
    return dict(Counter(messages).most_common())


def as_attr(messages: Sequence[str]) -> str:
    """The ``warnings`` attr: JSON ``{message: count}`` (``{}`` when there were none)."""
    return json.dumps(counts(messages))


def summary(messages: Sequence[str]) -> str:
    """``248 warnings (2 kinds), e.g.: <the most frequent>``; empty when there were none."""
    if not messages:
        return ""
    found = counts(messages)
    first = next(iter(found))
    kinds = f" ({len(found)} kinds)" if len(found) > 1 else ""
    plural = "s" if len(messages) > 1 else ""
    return f"{len(messages)} warning{plural}{kinds}, e.g.: {first}"


_SOURCE = re.compile(r"^([A-Za-z][\w.-]*): ")


def by_source(messages: Sequence[str]) -> dict[str, list[str]]:
    """Messages grouped by the method or policy they start with (``lr: ...``), else ``rmkit``."""
    out: dict[str, list[str]] = {}
    for text in messages:
        m = _SOURCE.match(text)
        out.setdefault(m.group(1) if m else "rmkit", []).append(text)
    return out
