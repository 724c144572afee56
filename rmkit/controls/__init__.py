"""Booking controls: one module per control type, each registered here by name.

A control decides, at each booking state, which products are on offer; the simulator replays it
against the customers a demand model draws. Solvers name their control in ``Tags.control``. Add a
control by writing one module with a :class:`~rmkit.controls.base.Control` subclass decorated
with :func:`register_control`, and listing the module in ``BUNDLED`` (or importing it yourself
before simulating); the simulator and the policy contract tests then pick it up.
"""

from __future__ import annotations

import importlib

from rmkit.controls.base import Control
from rmkit.errors import InputError

#: Control name -> class.
CONTROLS: dict[str, type[Control]] = {}
#: Modules of the controls rmkit ships.
BUNDLED = ("fcfs", "bid_price", "table", "period_table", "nested", "decisions", "cdlp_sets",
           "set_max", "rollout")
_loaded = False


def register_control(cls: type[Control]) -> type[Control]:
    """Class decorator: make a control known to the simulator and compile its kernel function."""
    from rmkit.kernels.replay import register_control_kernel

    if not cls.name:
        raise TypeError(f"{cls.__name__} needs a non-empty 'name'")
    if cls.name in CONTROLS and CONTROLS[cls.name] is not cls:
        raise TypeError(f"two controls are named {cls.name!r}")
    register_control_kernel(cls.arrays_type, cls.offers, cls.on_sale)
    CONTROLS[cls.name] = cls
    return cls


def load_controls() -> dict[str, type[Control]]:
    """Every registered control (importing the bundled ones first)."""
    global _loaded
    if not _loaded:
        for module in BUNDLED:
            importlib.import_module(f"rmkit.controls.{module}")
        _loaded = True
    return CONTROLS


def get_control(name: str) -> type[Control]:
    """A control by name; an unknown name lists the known ones."""
    controls = load_controls()
    if name not in controls:
        raise InputError(f"control: unknown control {name!r}; known controls: "
                         f"{', '.join(sorted(controls))}")
    return controls[name]


__all__ = ["CONTROLS", "Control", "get_control", "load_controls", "register_control"]
