"""rmkit: bid prices for network revenue management, measured against the optimum.

The public API is what this module names. Results are model estimates under the stated demand
model; validate them before using them to steer real sales.
"""

from rmkit._version import __version__
from rmkit.errors import InputError, ProblemTooLargeError, SolverError
from rmkit.methods.base import REGISTRY, Solver, Tags, get_solver, load_all, register
from rmkit.model.demand import DEMAND_KINDS, Arrivals, DemandModel, load_factor
from rmkit.model.independent import IndependentDemand
from rmkit.model.network import Leg, Network, Product
from rmkit.model.scenario import Scenario, load_scenario, save_scenario, scenario_from_model
from rmkit.results import SCHEMA, STATUSES, BookingState, SolveResult

#: Workflow functions, imported on first use so that ``import rmkit`` (and ``rmkit info``) stays
#: quick: name -> module.
_LAZY = {
    "simulate": "rmkit.workflows.simulate",
    "compare_policies": "rmkit.workflows.policy_comparison",
    "compare": "rmkit.workflows.compare",
    "calibrate": "rmkit.workflows.calibrate",
    "open_sweep": "rmkit.workflows.sweep",
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
    "Arrivals",
    "BookingState",
    "DEMAND_KINDS",
    "DemandModel",
    "IndependentDemand",
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
    "calibrate",
    "compare",
    "compare_policies",
    "get_solver",
    "load_all",
    "load_factor",
    "load_scenario",
    "open_sweep",
    "register",
    "save_scenario",
    "simulate",
    "scenario_from_model",
]
