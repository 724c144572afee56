"""Exceptions rmkit raises.

Every input problem is an :class:`InputError` (a ``ValueError``) whose message names the field,
the rule, the value received and, where it helps, the fix. The command line turns these into a
one-line message and exit status 2.
"""

from __future__ import annotations


class InputError(ValueError):
    """Bad user input: a scenario field, a parameter or a state that breaks a rule."""


class ProblemTooLargeError(InputError):
    """A problem that would need more memory or time than the configured limit allows."""


class SolverError(RuntimeError):
    """A numerical back end failed; the message says what to try."""


def param_error(owner: str, name: str, rule: str, value: object) -> InputError:
    """The one message template for a bad solver or command parameter."""
    return InputError(f"The {name!r} parameter of {owner} must be {rule}. Got {value!r} instead.")


def quoted(ids: object) -> str:
    """Ids for a message, each quoted (``'a', 'b'``): an id holding a newline or a comma cannot
    break the one-line message or blur where one id ends."""
    return ", ".join(repr(str(i)) for i in ids)  # type: ignore[attr-defined]
