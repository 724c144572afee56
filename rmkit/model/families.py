"""The instance families by name, as ``rmkit generate`` and sweep grids use them."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from rmkit.errors import InputError
from rmkit.model.choice_generators import hub_and_spoke_choice
from rmkit.model.generators import hub_and_spoke, line_network
from rmkit.model.scenario import Scenario

#: Generator name (as used by ``rmkit generate`` and sweep grids) -> function.
GENERATORS: dict[str, Callable[..., Scenario]] = {
    "hub-spoke": hub_and_spoke,
    "line": line_network,
    "hub-spoke-choice": hub_and_spoke_choice,
}

#: The positional size argument of each generator.
SIZE_ARGUMENT = {"hub-spoke": "spokes", "line": "legs", "hub-spoke-choice": "spokes"}


def generate(family: str, **settings: Any) -> Scenario:
    """Run a generator by family name with keyword settings (its size argument included)."""
    if family not in GENERATORS:
        raise InputError(f"generator: unknown family {family!r}; valid: {', '.join(GENERATORS)}")
    size_name = SIZE_ARGUMENT[family]
    if size_name not in settings:
        raise InputError(f"generator {family!r}: needs {size_name!r}")
    size = settings.pop(size_name)
    fn = GENERATORS[family]
    try:
        return fn(size, **settings)
    except TypeError as err:  # unknown keyword
        import inspect

        valid = ", ".join(inspect.signature(fn).parameters)
        raise InputError(f"generator {family!r}: {err}; valid settings: {valid}") from None

