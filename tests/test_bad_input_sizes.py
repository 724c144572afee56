"""Sizes and seeds checked before work: every array's memory is estimated from the sizes first and
refused with the estimate; seeds outside [0, 2**63 - 1] are refused where they enter."""

from __future__ import annotations

import numpy as np
import pytest

from rmkit import DemandModel, InputError, Network, ProblemTooLargeError, get_solver, simulate
from rmkit.limits import MAX_SEED
from rmkit.workflows.compare import compare

HUGE = 10**12


def problem(capacity: int = 3, periods: int = 4):
    net = Network.build([("ash", capacity), ("birch", 2)],
                        [("A", 100.0, ["ash"]), ("AB", 150.0, ["ash", "birch"])])
    return net, DemandModel(np.full((periods, 2), 0.2))


@pytest.mark.parametrize("method", ["dpd", "lr", "emsrb-heuristic", "emsrb", "davn"])
def test_seat_tables_refused_with_the_estimate(method):
    net, dem = problem(HUGE)
    solver = get_solver(method)
    reason = solver.refusal_reason(net, dem)  # what compare shows when it skips the method
    assert reason is not None and "capacity up to 1,000,000,000,000" in reason
    assert "TiB" in reason and "memory available" in reason
    with pytest.raises(ProblemTooLargeError, match=rf"{method}: cannot run .* needs about"):
        solver.solve(net, dem)


def test_lp_methods_still_run_on_huge_capacities():
    net, dem = problem(HUGE)
    result = get_solver("dlp").solve(net, dem)
    assert np.isfinite(result.value)


def test_exact_compares_its_limit_with_the_memory_there_is(monkeypatch):
    net, dem = problem(30, 50)
    monkeypatch.setattr("rmkit.limits.available_memory", lambda: 1000)
    with pytest.raises(ProblemTooLargeError, match=r"above the .* of memory available \(limit "
                       r"max_memory_gb = 1e\+12 GiB\)"):
        get_solver("exact", max_memory_gb=1e12).solve(net, dem)


@pytest.mark.parametrize("seed", [-1, MAX_SEED + 1, 2**64])
@pytest.mark.parametrize("method", ["ph", "rlp", "dlp"])
def test_seeds_out_of_range_are_refused_by_every_solver(method, seed):
    net, dem = problem()
    with pytest.raises(InputError, match=r"^seed: must be a whole number in \[0, 9223372036854775807\]"):
        get_solver(method).solve(net, dem, seed=seed)


def test_largest_seed_is_stored_in_the_result_file(tmp_path):
    import xarray as xr

    net, dem = problem()
    ds = get_solver("rlp", samples=4).solve(net, dem, seed=MAX_SEED).to_dataset()
    ds.to_netcdf(tmp_path / "r.nc", engine="h5netcdf")
    with xr.open_dataset(tmp_path / "r.nc", engine="h5netcdf") as back:
        assert int(back.attrs["seed"]) == MAX_SEED


def test_simulate_refuses_paths_beyond_memory():
    net, dem = problem()
    with pytest.raises(ProblemTooLargeError, match=r"^paths: .* paths x 4 periods needs about"):
        simulate(net, dem, "fcfs", paths=HUGE, seed=0)
    with pytest.raises(ProblemTooLargeError, match=r"^paths: "):
        dem.sample_arrivals(HUGE, 0)
    with pytest.raises(InputError, match="seed"):
        simulate(net, dem, "fcfs", paths=10, seed=MAX_SEED + 1)


def test_compare_checks_paths_and_settings_before_any_solve():
    net, dem = problem()
    said: list[str] = []
    with pytest.raises(ProblemTooLargeError, match="^paths: "):
        compare(net, dem, methods=["dlp", "exact"], paths=HUGE, progress=said.append)
    with pytest.raises(InputError, match=r"'samples' parameter of rlp"):
        compare(net, dem, methods=["dlp", "rlp"], paths=10, settings={"rlp": {"samples": -1}},
                progress=said.append)
    assert said == []  # refused before the first method was solved


def test_compare_refuses_tables_beyond_memory_before_any_solve():
    net, dem = problem(HUGE)
    said: list[str] = []
    with pytest.raises(ProblemTooLargeError, match=r"^capacity: the bid-price tables of 2 methods "
                       r"x 4 periods x capacity up to 1,000,000,000,000 x 2 legs needs about"):
        compare(net, dem, methods=["dlp", "dpd"], paths=10, seed=1, progress=said.append)
    assert said == []


@pytest.mark.parametrize(("kwargs", "field"), [({"seed": -1}, "seed"),
                                               ({"seed": 0, "fresh_seed": MAX_SEED + 1}, "fresh_seed")])
def test_calibrate_checks_both_seeds_before_the_search(kwargs, field):
    from rmkit.workflows.calibrate import calibrate

    net, dem = problem()
    with pytest.raises(InputError, match=rf"^{field}: must be a whole number in \[0, "):
        calibrate(net, dem, "emsrb-heuristic", {"multiplier": "0.5:1.5"}, paths=10, **kwargs)


@pytest.mark.parametrize(("family", "settings"), [
    ("hub-spoke", {"spokes": 100_000, "alpha": 1.0}),
    ("line", {"legs": 3, "alpha": 1.0, "periods": 10**10}),
])
def test_generators_estimate_before_building(family, settings):
    from rmkit.model.families import generate

    with pytest.raises(ProblemTooLargeError, match=r"needs about .* of memory available; generate "
                       r"a smaller instance"):
        generate(family, **settings)
