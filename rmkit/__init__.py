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
    "get_solver",
    "load_all",
    "load_factor",
    "load_scenario",
    "register",
    "save_scenario",
    "scenario_from_model",
]
