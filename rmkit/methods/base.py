"""The solver interface and the registry of methods.

Every method is a subclass of :class:`Solver` in its own module under ``rmkit/solvers/``,
registered with the :func:`register` decorator. Settings are keyword-only, stored as given and
checked when :meth:`Solver.solve` runs; the one signature is
``solve(network, demand, *, state=None, seed=None) -> SolveResult``.

Adding a method: write ``rmkit/solvers/my_method.py`` with a ``@register`` class that sets
``name``, ``tags``, ``citation``, ``params`` and implements ``_solve``. The registry imports every
module in that package, so the method is then selectable by name everywhere and the shared
contract tests (tests/test_contract.py) run on it automatically.
"""

from __future__ import annotations

import importlib
import pkgutil
from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np

from rmkit.errors import InputError, ProblemTooLargeError, param_error
from rmkit.limits import check_seed, memory_refusal
from rmkit.model.demand import DemandModel, check_compatible
from rmkit.model.network import Network
from rmkit.results import BookingState, SolveResult, StatePolicy, Timer


@dataclass(frozen=True)
class Tags:
    """What a method is, which decides what comparisons may conclude and which checks apply."""

    exact: bool = False  # gives the optimum of the network DP
    upper_bound: bool = False  # value is an upper bound on the optimum
    heuristic: bool = False  # value carries no guarantee
    stochastic: bool = False  # uses random samples (seeded)
    small_state_space: bool = False  # only runs where the network DP state space is small
    capacity_dependent: bool = False  # bid prices depend on seats left and period
    gives_bid_prices: bool = True  # leg bid prices (False for pure bounds, e.g. perfect hindsight)
    control: str = "bid_price"  # the booking control (rmkit.controls) it steers sales by; "": none
    reference: bool = False  # cheap and sure enough to solve as a yardstick (optimum or bound)
    needs_displacement: bool = False  # counts network fares from another method's bid prices
    # the independent-demand approximation a view solves instead of the scenario's demand
    # (rmkit.methods.independent_view; "" = the method solves the demand it is given)
    assumes_independent_demand: str = ""


@dataclass(frozen=True)
class Search:
    """How calibration may search a setting: ``continuous`` (``LO:HI``), ``integer`` (``LO:HI``,
    a grid) or ``choice`` (a comma-separated subset of ``choices``)."""

    kind: str
    help: str = ""
    choices: tuple[Any, ...] = ()


@dataclass(frozen=True)
class Param:
    """A solver setting: its default, the rule in words, a check of that rule, and whether (and
    how) calibration may search it."""

    default: Any
    rule: str
    check: Callable[[Any], bool]
    search: Search | None = None


def positive_int(v: Any) -> bool:
    return isinstance(v, (int, np.integer)) and not isinstance(v, bool) and v >= 1


def non_negative_int(v: Any) -> bool:
    return isinstance(v, (int, np.integer)) and not isinstance(v, bool) and v >= 0


def positive_float(v: Any) -> bool:
    return isinstance(v, (int, float, np.floating, np.integer)) and not isinstance(v, bool) and (
        np.isfinite(v) and v > 0
    )


def one_of(*choices: str) -> Callable[[Any], bool]:
    return lambda v: v in choices


@dataclass(frozen=True, eq=False)
class Problem:
    """A validated (network, demand, state) triple handed to ``_solve``."""

    network: Network
    demand: DemandModel
    period: int
    capacity: np.ndarray = field(repr=False)

    @property
    def probabilities(self) -> np.ndarray:
        """``(T - period, n)``: each product's sale probability per period still to come, with
        every product offered (the request table of independent demand)."""
        return self.demand.sale_probabilities(None, self.period)

    @property
    def demand_to_come(self) -> np.ndarray:
        """Expected sales per product from the period solved from, every product offered."""
        return self.demand.demand_to_come(self.period)


@dataclass
class ResolveSession:
    """What a method keeps between the re-solves of one simulated run.

    ``cache`` is the method's own (warm starts); ``counts`` tally what happened (e.g. how many
    re-solves stopped at their budget) and ``values`` collect figures for the summary line;
    ``note`` is the line itself when a method sets it directly.
    """

    cache: dict[str, Any] = field(default_factory=dict)
    counts: dict[str, int] = field(default_factory=dict)
    values: dict[str, list[float]] = field(default_factory=dict)
    note: str = ""

    def count(self, key: str, by: int = 1) -> None:
        self.counts[key] = self.counts.get(key, 0) + by

    def record(self, key: str, value: float) -> None:
        self.values.setdefault(key, []).append(float(value))


@dataclass
class SolveOutput:
    """What ``_solve`` returns; :meth:`Solver.solve` packages it into a :class:`SolveResult`."""

    variables: dict[str, np.ndarray]
    status: str = "optimal"
    message: str = ""
    payload: dict[str, Any] = field(default_factory=dict)
    policy: StatePolicy | None = None
    #: The solver keeps no reference to these arrays: the result takes them without a copy.
    owned: bool = False


class Solver:
    """Base class of every bid-price method and bound."""

    name: ClassVar[str] = ""
    tags: ClassVar[Tags] = Tags()
    citation: ClassVar[str] = ""
    params: ClassVar[Mapping[str, Param]] = {}
    #: Demand kinds (``DemandModel.kind``) the method solves; ``solve`` refuses the others.
    demand_kinds: ClassVar[tuple[str, ...]] = ("independent",)
    #: Error raised when :meth:`accepts` refuses a problem (a size refusal sets ProblemTooLargeError).
    refusal: ClassVar[type[InputError]] = InputError
    #: Whether "every method" (compare without --methods, the demo) includes it; variants whose
    #: policy is costly to simulate are named explicitly instead.
    by_default: ClassVar[bool] = True
    #: Whether the states of a re-solve round may be solved side by side in threads: each solve
    #: keeps to its own objects and spends most of its time without the GIL (HiGHS, numba
    #: ``nogil`` kernels). Numbers do not change; a method whose re-solves share work overrides
    #: :meth:`_resolve` instead.
    solves_side_by_side: ClassVar[bool] = False
    #: Settings that skip what only the method's policy needs (the exact DP's decision table);
    #: a caller that wants just the value applies them through :meth:`for_value`.
    value_only_settings: ClassVar[Mapping[str, Any]] = {}

    def policy_resolves(self) -> int:
        """Re-solves the method's policy is defined with: the simulator re-solves it at no fewer
        equally spaced periods than this, whatever it is asked (0: as asked)."""
        return 0

    def __init__(self, **settings: Any) -> None:
        unknown = sorted(set(settings) - set(self.params))
        if unknown:
            valid = ", ".join(sorted(self.params)) or "none"
            raise InputError(
                f"{self.name}: unknown parameter {unknown[0]!r}; valid parameters: {valid}"
            )
        self._settings = dict(settings)

    def for_value(self) -> Solver:
        """This solver for a caller that reads the value and bid prices but never replays the
        policy (``rmkit bound``, a sweep's bounds): :attr:`value_only_settings` added under the
        settings given, so an explicit setting still wins. The value is the same either way;
        the solve may take less memory and time."""
        if not self.value_only_settings:
            return self
        return type(self)(**{**self.value_only_settings, **self._settings})

    def get_params(self) -> dict[str, Any]:
        """Every setting, defaults filled in, as given (not validated)."""
        out = {k: p.default for k, p in self.params.items()}
        out.update(self._settings)
        return out

    def check_params(self) -> dict[str, Any]:
        """Every setting checked against its rule (:class:`InputError` naming the first bad one),
        defaults filled in: callers check settings before any work starts."""
        return self._checked_params()

    def _checked_params(self) -> dict[str, Any]:
        out = self.get_params()
        for key, value in out.items():
            rule = self.params[key]
            if not rule.check(value):
                raise param_error(self.name, key, rule.rule, value)
        return out

    def __repr__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in self._settings.items())
        return f"{type(self).__name__}({args})"

    def accepts(self, network: Network, demand: DemandModel) -> str | None:
        """``None`` when the method can run on this problem, else the reason it cannot."""
        return None

    def memory_bytes(self, network: Network, demand: DemandModel) -> int:
        """Bytes the method's largest arrays take, estimated from the sizes before allocating.

        The default reads the tags: a method with bid prices by seats left holds a few
        ``(periods, max capacity + 1, legs)`` tables; a nested-limit method (and any method
        that computes seat values) a few ``(legs, max capacity + 1)`` rows per period of the
        booking curve it reads. Methods that know better override it.
        """
        seats = network.n_legs * (network.max_capacity + 1)
        if self.tags.capacity_dependent:
            return 3 * 8 * (demand.n_periods + 1) * seats
        if self.tags.control == "nested" or self.tags.needs_displacement:
            return 4 * 8 * seats
        return 8 * demand.n_periods * (network.n_products + network.n_legs)

    def memory_reason(self, network: Network, demand: DemandModel) -> str | None:
        """Why the method's arrays would not fit in the memory available, else ``None``."""
        return memory_refusal(self.memory_bytes(network, demand),
                              f"{self.name} over {demand.n_periods:,} periods x {network.n_legs} "
                              f"legs x capacity up to {network.max_capacity:,}")

    def kind_refusal(self, demand: DemandModel) -> str | None:
        """``None`` when the method solves ``demand``'s kind, else the one-line reason."""
        if demand.kind in self.demand_kinds:
            return None
        reason = (f"{self.name} solves {' or '.join(self.demand_kinds)} demand, not "
                  f"{demand.kind!r} demand")
        if "independent" in self.demand_kinds:  # the view of rmkit.methods.independent_view
            reason += (f"; '{self.name}:independent' runs it on an independent-demand "
                       "approximation")
        return reason

    def refusal_reason(self, network: Network, demand: DemandModel) -> str | None:
        """Why the method cannot run on this problem (its demand kind first, then its size), else
        ``None``."""
        return (self.kind_refusal(demand) or self.accepts(network, demand)
                or self.memory_reason(network, demand))

    def marginal_values(self, network: Network, demand: DemandModel, periods: np.ndarray,
                        states: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Exact leg marginal values ``(K, m)`` and product opportunity costs ``(K, n)`` at the
        pairs (``periods[q]``, ``states[q]``): ``V_{t+1}(x) - V_{t+1}(x - e_i)`` and
        ``V_{t+1}(x) - V_{t+1}(x - A_j)``, ``+inf`` where not there. Methods tagged ``exact``
        implement it; comparisons use it to measure other methods' bid prices."""
        raise NotImplementedError(f"{self.name} does not give the exact value function")

    def solve(
        self,
        network: Network,
        demand: DemandModel,
        *,
        state: BookingState | None = None,
        seed: int | None = None,
    ) -> SolveResult:
        """Solve from ``state`` (default: period 0, full capacity); never mutates its inputs."""
        params = self._checked_params()
        self._check_problem(network, demand)
        problem, seed = self._problem(network, demand, state, seed)
        with Timer() as timer:
            out = self._solve(problem, params, seed)
        return self._result(problem, out, params, seed, timer.seconds)

    def resolve(
        self,
        network: Network,
        demand: DemandModel,
        states: Sequence[BookingState],
        seeds: Sequence[int | None],
        session: ResolveSession,
    ) -> list[SolveResult]:
        """Re-solve from many booking states of one simulated run (the simulator's re-solves).

        ``session`` lives for one policy's run: a method may keep there what it learnt from
        earlier solves of the same problem (warm starts) and counts for its one-line summary
        (:meth:`resolve_summary`). The default solves each state on its own, exactly as
        :meth:`solve`; methods override :meth:`_resolve` to share work between states.
        """
        if type(self)._resolve is Solver._resolve:  # nothing shared: exactly solve, state by state
            pairs = list(zip(states, seeds, strict=True))

            def one(pair: tuple[BookingState, int | None]) -> SolveResult:
                return self.solve(network, demand, state=pair[0], seed=pair[1])

            if self.solves_side_by_side:
                from rmkit.methods.shared.side_by_side import side_by_side

                return side_by_side(one, pairs)
            return [one(pair) for pair in pairs]
        params = self._checked_params()
        self._check_problem(network, demand)
        problems, used = [], []
        for state, seed in zip(states, seeds, strict=True):
            problem, seed = self._problem(network, demand, state, seed)
            problems.append(problem)
            used.append(seed)
        with Timer() as timer:
            outs = self._resolve(problems, params, used, session)
        each = timer.seconds / max(len(problems), 1)
        return [self._result(p, o, params, s, each)
                for p, o, s in zip(problems, outs, used, strict=True)]

    def resolve_summary(self, session: ResolveSession) -> str:
        """One line on how the re-solves of a run went ("" when there is nothing to say)."""
        return session.note

    def _resolve(self, problems: list[Problem], params: dict[str, Any],
                 seeds: list[int | None], session: ResolveSession) -> list[SolveOutput]:
        return [self._solve(p, params, s) for p, s in zip(problems, seeds, strict=True)]

    # ------------------------------------------------------------ shared by solve and resolve
    def _check_problem(self, network: Network, demand: DemandModel) -> None:
        check_compatible(network, demand)
        kind = self.kind_refusal(demand)
        if kind is not None:
            raise InputError(f"{self.name}: cannot run on this problem: {kind}")
        reason = self.accepts(network, demand)
        if reason is not None:
            raise self.refusal(f"{self.name}: cannot run on this problem: {reason}")
        size = self.memory_reason(network, demand)
        if size is not None:
            raise ProblemTooLargeError(f"{self.name}: cannot run on this problem: {size}; use a "
                                       "method without seat-by-seat tables (dlp, rlp, pnlp)")

    def _problem(self, network: Network, demand: DemandModel, state: BookingState | None,
                 seed: int | None) -> tuple[Problem, int | None]:
        if seed is not None:
            seed = check_seed(seed)
        period, capacity = (state or BookingState()).resolve(network, demand.n_periods)
        if seed is None and self.tags.stochastic:
            seed = 0
        return Problem(network, demand, period, capacity), seed

    def _result(self, problem: Problem, out: SolveOutput, params: dict[str, Any],
                seed: int | None, seconds: float) -> SolveResult:
        return SolveResult(
            method=self.name,
            network=problem.network,
            n_periods=problem.demand.n_periods,
            variables=out.variables,
            status=out.status,
            parameters=params,
            seed=seed,
            seconds=seconds,
            period=problem.period,
            capacity=tuple(int(c) for c in problem.capacity),
            message=out.message,
            payload=out.payload,
            policy=out.policy,
            owned=out.owned,
        )

    def _solve(self, problem: Problem, params: dict[str, Any], seed: int | None) -> SolveOutput:
        raise NotImplementedError


#: The label of results and rows computed through an independent-demand view.
ASSUMES_INDEPENDENT = "assumes independent demand"


def assumption_label(approximation: str) -> str:
    """``"assumes independent demand (<approximation>)"``, or ``""`` for none: how comparisons,
    simulations and sweeps label a method run through the independent-demand view."""
    return f"{ASSUMES_INDEPENDENT} ({approximation})" if approximation else ""


def assumption_of(solver: Solver | type[Solver] | None) -> str:
    """:func:`assumption_label` of a solver's view approximation (``""``: none)."""
    return assumption_label(solver.tags.assumes_independent_demand if solver is not None else "")


def kind_of(solver: Solver | type[Solver]) -> str:
    """What a method's value is: ``optimum``, ``upper bound`` or ``heuristic``."""
    tags = solver.tags
    return "optimum" if tags.exact else "upper bound" if tags.upper_bound else "heuristic"


REGISTRY: dict[str, type[Solver]] = {}
_loaded = False


def register(cls: type[Solver]) -> type[Solver]:
    """Class decorator: make a solver selectable by its ``name``."""
    if not cls.name:
        raise TypeError(f"{cls.__name__} needs a non-empty 'name'")
    if cls.name in REGISTRY and REGISTRY[cls.name] is not cls:
        raise TypeError(f"two solvers are named {cls.name!r}")
    if not cls.citation:
        raise TypeError(f"{cls.__name__} must cite its paper in 'citation'")
    if cls.tags.control == "bid_price" and not cls.tags.gives_bid_prices:
        raise TypeError(f"{cls.__name__} gives no bid prices, so the bid_price control cannot "
                        "steer sales by it; set Tags(control='') (or the control it does use)")
    REGISTRY[cls.name] = cls
    return cls


def load_all() -> dict[str, type[Solver]]:
    """Import every module of ``rmkit.methods`` (each registers itself); return the registry."""
    global _loaded
    if not _loaded:
        import rmkit.methods as pkg

        for info in pkgutil.iter_modules(pkg.__path__):
            if not (info.ispkg or info.name.startswith("_") or info.name == "base"):
                importlib.import_module(f"rmkit.methods.{info.name}")
        _loaded = True
    return REGISTRY


#: Derived method names ``"<method>:<view>"`` -> a factory ``(method name, settings) -> Solver``,
#: registered by the module that defines the view (e.g. ``:independent``).
VIEWS: dict[str, Callable[[str, dict[str, Any]], Solver]] = {}


def register_view(suffix: str, factory: Callable[[str, dict[str, Any]], Solver]) -> None:
    """Make ``"<method>:<suffix>"`` a method name that ``factory`` builds."""
    VIEWS[suffix] = factory


def is_method_name(name: str) -> bool:
    """A registered method, or a view of one (``"<method>:<view>"``)."""
    reg = load_all()
    base, sep, suffix = name.rpartition(":")
    return name in reg or bool(sep and suffix in VIEWS and base in reg)


def get_solver(name: str, **settings: Any) -> Solver:
    """A solver instance by method name; an unknown name lists the valid ones."""
    reg = load_all()
    if name not in reg:
        base, sep, suffix = name.rpartition(":")
        if sep and suffix in VIEWS:
            return VIEWS[suffix](base, settings)
        raise InputError(f"method: unknown method {name!r}; valid methods: {', '.join(sorted(reg))}")
    return reg[name](**settings)
