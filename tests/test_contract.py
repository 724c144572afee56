"""The shared solver contract: every registered method passes these checks automatically, on
every registered demand kind it accepts, and refuses the others with a one-line reason."""

from __future__ import annotations

import copy
import json
import pickle
import re
import sys

import numpy as np
import pytest
import xarray as xr

from rmkit import SCHEMA, STATUSES, BookingState, InputError, load_all
from rmkit.model.demand import demand_kinds
from tests.instances import brute_force_values, one_seat_problem, small_problem

REGISTRY = load_all()
KINDS = demand_kinds()


@pytest.fixture(params=sorted(REGISTRY))
def solver(request):
    return REGISTRY[request.param]()


def kind_problem(kind: str):
    """The small network with a demand model of ``kind`` (its own random example; for
    independent demand the fixture every other test of this file uses)."""
    if kind == "independent":
        return small_problem()
    net, _ = small_problem()
    return net, KINDS[kind].random_example(net, 12, seed=7)


CASES = [(name, kind) for name in sorted(REGISTRY) for kind in sorted(KINDS)]
ACCEPTED = [c for c in CASES if c[1] in REGISTRY[c[0]].demand_kinds]
REFUSED = [c for c in CASES if c[1] not in REGISTRY[c[0]].demand_kinds]


def _ids(cases):
    return [f"{name}-{kind}" for name, kind in cases]


@pytest.fixture(params=ACCEPTED, ids=_ids(ACCEPTED))
def accepted(request):
    """(solver, network, demand) for every method on every demand kind it accepts."""
    name, kind = request.param
    solver = REGISTRY[name]()
    net, dem = kind_problem(kind)
    if solver.refusal_reason(net, dem) is not None:
        pytest.skip(solver.refusal_reason(net, dem))
    return solver, net, dem


def test_every_method_declares_registered_demand_kinds(solver):
    assert solver.demand_kinds and set(solver.demand_kinds) <= set(KINDS)


@pytest.mark.parametrize(("name", "kind"), REFUSED or [pytest.param("", "", marks=pytest.mark.skip(
    reason="every method accepts every registered demand kind"))], ids=_ids(REFUSED) or None)
def test_a_demand_kind_it_does_not_solve_is_refused_in_one_line(name, kind):
    solver = REGISTRY[name]()
    net, dem = kind_problem(kind)
    reason = solver.refusal_reason(net, dem)
    assert reason and "\n" not in reason and kind in reason
    with pytest.raises(InputError, match=f"{name}: cannot run on this problem: .*{kind}") as err:
        solver.solve(net, dem)
    assert "\n" not in str(err.value)


def test_runs_on_every_kind_it_accepts(accepted):
    """Deterministic, non-mutating, schema-true Dataset with provenance, on every kind."""
    from rmkit import schema

    solver, net, dem = accepted
    before = _snapshot(net, dem)
    first = solver.solve(net, dem, seed=1).to_dataset()
    second = solver.solve(net, dem, seed=1).to_dataset()
    xr.testing.assert_identical(_comparable(first), _comparable(second))
    for a, b in zip(before, _snapshot(net, dem), strict=True):
        np.testing.assert_array_equal(a, b)
    assert schema.check(first) == []
    assert first.attrs["method"] == solver.name and "value" in first
    mid = solver.solve(net, dem, state=BookingState(period=dem.n_periods // 2), seed=1)
    assert mid.period == dem.n_periods // 2


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


def test_known_optimum_or_bound(solver):
    """1 seat, 1 period, fare 10, request chance 0.3: the optimum is 3.0 (by hand)."""
    net, dem = one_seat_problem()
    if solver.accepts(net, dem) is not None:
        pytest.skip(solver.accepts(net, dem))
    res = solver.solve(net, dem, seed=0)
    assert res.status in STATUSES
    if solver.tags.exact:
        assert res.value == pytest.approx(3.0, rel=1e-12)
    elif solver.tags.upper_bound and not solver.tags.stochastic:
        assert res.value >= 3.0 - 1e-9


def test_bounds_against_brute_force(solver):
    net, dem = small_problem()
    if solver.accepts(net, dem) is not None:
        pytest.skip(solver.accepts(net, dem))
    optimum = brute_force_values(net, dem)[0][tuple(int(c) for c in net.capacities)]
    res = solver.solve(net, dem, seed=3)
    if solver.tags.exact:
        assert res.value == pytest.approx(optimum, rel=1e-9)
    elif solver.tags.upper_bound:
        slack = 3 * res.stderr if res.stderr is not None else 1e-7 * optimum
        assert res.value >= optimum - slack


def test_dataset_schema_and_provenance(solver, tmp_path):
    net, dem = small_problem()
    if solver.accepts(net, dem) is not None:
        pytest.skip(solver.accepts(net, dem))
    res = solver.solve(net, dem, seed=2)
    ds = res.to_dataset()
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


def test_bid_prices_are_non_negative(solver):
    net, dem = small_problem()
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


def test_solves_from_a_mid_horizon_state(solver):
    net, dem = small_problem()
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


def test_unknown_parameter_lists_valid_ones(solver):
    with pytest.raises(InputError, match="valid parameters"):
        type(solver)(no_such_setting=1)


def test_bad_state_is_refused(solver):
    net, dem = small_problem()
    with pytest.raises(InputError, match="state.period"):
        solver.solve(net, dem, state=BookingState(period=dem.n_periods))
    with pytest.raises(InputError, match="state.capacity"):
        solver.solve(net, dem, state=BookingState(capacity=tuple([-1] * net.n_legs)))


def test_picklable_and_params_round_trip(solver):
    clone = pickle.loads(pickle.dumps(solver))
    assert clone.get_params() == solver.get_params()
    assert copy.deepcopy(solver).get_params() == solver.get_params()
    assert type(solver)(**solver.get_params()).get_params() == solver.get_params()
