"""The shared solver contract: every registered method passes these checks automatically, on
every demand kind it solves (each kind's ``random_example`` on the small network), and refuses
the kinds it does not solve with a one-line reason."""

from __future__ import annotations

import copy
import json
import pickle
import re
import sys

import numpy as np
import pytest
import xarray as xr

from rmkit import SCHEMA, STATUSES, BookingState, InputError, load_all, schema
from rmkit.model.choice import ChoiceDemand
from rmkit.model.demand import demand_kinds
from tests.choice_instances import brute_force_choice_values
from tests.instances import brute_force_values, one_seat_problem, small_problem

REGISTRY = load_all()
KINDS = demand_kinds()
#: The one-seat problem written in each kind (its optimum is 3.0 in all of them).
ONE_SEAT = {
    "independent": lambda dem: dem,
    "choice": lambda dem: ChoiceDemand.independent_equivalent(dem.probabilities),
}
#: Brute-force optima by kind (code in tests/, independent of rmkit's kernels).
BRUTE_FORCE = {"independent": brute_force_values, "choice": brute_force_choice_values}
_PROBLEMS: dict = {}


def problem_of(kind: str):
    """The small network with demand of ``kind`` (independent: the fixture; others: the kind's
    ``random_example`` on the same network), and its brute-force optimum (cached)."""
    if kind not in _PROBLEMS:
        net, dem = small_problem()
        if kind != "independent":
            dem = KINDS[kind].random_example(net, dem.n_periods, 7)
        c = tuple(int(v) for v in net.capacities)
        _PROBLEMS[kind] = (net, dem, BRUTE_FORCE[kind](net, dem)[0][c])
    return _PROBLEMS[kind]


CASES = [(name, kind) for name in sorted(REGISTRY) for kind in sorted(KINDS)
         if kind in REGISTRY[name].demand_kinds]
REFUSED = [(name, kind) for name in sorted(REGISTRY) for kind in sorted(KINDS)
           if kind not in REGISTRY[name].demand_kinds]


def kind_problem(kind: str):
    """(network, demand) of :func:`problem_of`, for the other contract suites."""
    return problem_of(kind)[:2]


@pytest.fixture(params=CASES, ids=[f"{n}-{k}" for n, k in CASES])
def case(request):
    name, kind = request.param
    net, dem, optimum = problem_of(kind)
    return REGISTRY[name](), net, dem, optimum


@pytest.fixture(params=sorted(REGISTRY))
def solver(request):
    return REGISTRY[request.param]()


def _comparable(ds: xr.Dataset) -> xr.Dataset:
    ds = ds.copy()
    ds.attrs.pop("seconds", None)
    return ds


def _snapshot(net, dem):
    return (
        net.incidence.copy(),
        net.capacities.copy(),
        net.fares.copy(),
        *(a.copy() for a in dem.content_arrays()),
    )


def test_registry_is_not_empty():
    assert len(REGISTRY) >= 1


def test_cites_its_paper(solver):
    cls = type(solver)
    doc = (cls.__doc__ or "") + (sys.modules[cls.__module__].__doc__ or "")
    years = re.findall(r"\b(?:19|20)\d\d\b", solver.citation)
    assert years, "the citation names author, year and title"
    assert any(y in doc for y in years), "the docstring cites the paper"


def test_known_optimum_or_bound(case):
    """1 seat, 1 period, fare 10, request chance 0.3: the optimum is 3.0 (by hand), written in
    the demand kind of the case."""
    solver, _, kind_demand, _ = case
    net, dem = one_seat_problem()
    dem = ONE_SEAT[kind_demand.kind](dem)
    if solver.accepts(net, dem) is not None:
        pytest.skip(solver.accepts(net, dem))
    res = solver.solve(net, dem, seed=0)
    assert res.status in STATUSES
    if solver.tags.exact:
        assert res.value == pytest.approx(3.0, rel=1e-12)
    elif solver.tags.upper_bound and not solver.tags.stochastic:
        assert res.value >= 3.0 - 1e-9


def test_bounds_against_brute_force(case):
    solver, net, dem, optimum = case
    if solver.accepts(net, dem) is not None:
        pytest.skip(solver.accepts(net, dem))
    res = solver.solve(net, dem, seed=3)
    if solver.tags.exact:
        assert res.value == pytest.approx(optimum, rel=1e-9)
    elif solver.tags.upper_bound:
        slack = 3 * res.stderr if res.stderr is not None else 1e-7 * optimum
        assert res.value >= optimum - slack


def test_deterministic_and_non_mutating(case):
    solver, net, dem, _ = case
    if solver.accepts(net, dem) is not None:
        pytest.skip(solver.accepts(net, dem))
    before = _snapshot(net, dem)
    first = solver.solve(net, dem, seed=1).to_dataset()
    second = solver.solve(net, dem, seed=1).to_dataset()
    xr.testing.assert_identical(_comparable(first), _comparable(second))
    for a, b in zip(before, _snapshot(net, dem), strict=True):
        np.testing.assert_array_equal(a, b)


def test_dataset_schema_and_provenance(case, tmp_path):
    solver, net, dem, _ = case
    if solver.accepts(net, dem) is not None:
        pytest.skip(solver.accepts(net, dem))
    res = solver.solve(net, dem, seed=2)
    ds = res.to_dataset()
    assert schema.check(ds) == []
    for name, var in ds.data_vars.items():
        assert var.dims == SCHEMA[name].dims
        assert var.attrs["units"] == SCHEMA[name].units
    assert ds.attrs["method"] == solver.name
    assert json.loads(ds.attrs["parameters"]) == json.loads(json.dumps(solver.get_params(),
                                                                      default=str))
    assert ds.attrs["status"] in STATUSES
    assert "rmkit_version" in ds.attrs
    assert "value" in ds
    path = tmp_path / "result.nc"
    ds.to_netcdf(path, engine="h5netcdf")
    with xr.open_dataset(path, engine="h5netcdf") as back:
        xr.testing.assert_identical(back.load(), ds)


def test_bid_prices_are_non_negative(case):
    solver, net, dem, _ = case
    if not solver.tags.gives_bid_prices or solver.accepts(net, dem) is not None:
        pytest.skip("no bid prices on this problem")
    res = solver.solve(net, dem, seed=4)
    bp = res.bid_prices
    assert bp.shape == (net.n_legs,)
    assert np.all(bp >= -1e-9)
    if "bid_price_table" in res:
        table = res["bid_price_table"]
        for i, c in enumerate(net.capacities):
            seats = table[:, 1 : c + 1, i]
            assert np.all(np.isfinite(seats)) and np.all(seats >= -1e-9)
            assert np.all(np.isinf(table[:, 0, i]))
            assert np.all(np.isnan(table[:, c + 1 :, i]))


def test_solves_from_a_mid_horizon_state(case):
    solver, net, dem, _ = case
    if solver.accepts(net, dem) is not None:
        pytest.skip(solver.accepts(net, dem))
    state = BookingState(period=dem.n_periods // 2, capacity=tuple(int(c) // 2 for c in
                                                                    net.capacities))
    res = solver.solve(net, dem, state=state, seed=5)
    assert res.period == dem.n_periods // 2
    assert res.capacity == state.capacity
    ds = res.to_dataset()
    if "period" in ds.dims:
        assert int(ds.period[0]) == dem.n_periods // 2
    if solver.tags.exact or solver.tags.upper_bound:
        assert res.value <= solver.solve(net, dem, seed=5).value + 1e-9 + 3 * (res.stderr or 0)


@pytest.mark.parametrize(("name", "kind"), REFUSED, ids=[f"{n}-{k}" for n, k in REFUSED])
def test_refuses_a_kind_it_does_not_solve_in_one_line(name, kind):
    solver = REGISTRY[name]()
    net, dem, _ = problem_of(kind)
    reason = solver.refusal_reason(net, dem)
    assert reason is not None and repr(kind) in reason and "\n" not in reason
    with pytest.raises(InputError) as err:
        solver.solve(net, dem)
    assert str(err.value) == f"{name}: cannot run on this problem: {reason}"


def test_every_kind_is_covered():
    assert set(ONE_SEAT) == set(KINDS) == set(BRUTE_FORCE)
    assert {k for _, k in CASES} == set(KINDS)


def test_unknown_parameter_lists_valid_ones(solver):
    with pytest.raises(InputError, match="valid parameters"):
        type(solver)(no_such_setting=1)


def test_bad_state_is_refused(solver):
    net, dem, _ = problem_of(solver.demand_kinds[0])
    with pytest.raises(InputError, match="state.period"):
        solver.solve(net, dem, state=BookingState(period=dem.n_periods))
    with pytest.raises(InputError, match="state.capacity"):
        solver.solve(net, dem, state=BookingState(capacity=tuple([-1] * net.n_legs)))


def test_picklable_and_params_round_trip(solver):
    clone = pickle.loads(pickle.dumps(solver))
    assert clone.get_params() == solver.get_params()
    assert copy.deepcopy(solver).get_params() == solver.get_params()
    assert type(solver)(**solver.get_params()).get_params() == solver.get_params()
