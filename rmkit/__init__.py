"""rmkit: bid prices for network revenue management, measured against the optimum.

The public API is what this module names. Results are model estimates under the stated demand
model; validate them before using them to steer real sales.
"""

from rmkit._version import __version__
from rmkit.demand import DemandModel, load_factor
from rmkit.errors import InputError, ProblemTooLargeError, SolverError
from rmkit.network import Leg, Network, Product
from rmkit.results import SCHEMA, STATUSES, BookingState, SolveResult
from rmkit.scenario import Scenario, load_scenario, save_scenario, scenario_from_model
from rmkit.solver import REGISTRY, Solver, Tags, get_solver, load_all, register

#: Workflow functions, imported on first use so that ``import rmkit`` (and ``rmkit info``) stays
#: quick: name -> module. Functions named like their module (``rmkit.simulate.simulate``,
#: ``rmkit.compare.compare``, ``rmkit.calibrate.calibrate``) are imported from that module: a
#: package attribute of the same name would be replaced by the module on its first import.
_LAZY = {
    "compare_policies": "rmkit.simulate",
    "open_sweep": "rmkit.sweep",
}


def __getattr__(name: str):
    if name in _LAZY:
        import importlib

        return getattr(importlib.import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'rmkit' has no attribute {name!r}")


__all__ = [
    "REGISTRY",
    "SCHEMA",
    "STATUSES",
    "BookingState",
    "DemandModel",
    "InputError",
    "Leg",
    "Network",
    "ProblemTooLargeError",
    "Product",
    "Scenario",
    "SolveResult",
    "Solver",
    "SolverError",
    "Tags",
    "__version__",
    "compare_policies",
    "get_solver",
    "load_all",
    "load_factor",
    "load_scenario",
    "open_sweep",
    "register",
    "save_scenario",
    "scenario_from_model",
]
