"""The independent-demand view: an independent-demand method on choice demand, explicitly."""

from __future__ import annotations

import pickle

import numpy as np
import pytest

from rmkit import InputError, get_solver, load_all, simulate
from rmkit.methods.independent_view import IndependentView, independent_demand
from rmkit.model.choice import ChoiceDemand
from tests.choice_instances import parallel_flights
from tests.instances import small_problem

INDEPENDENT_METHODS = sorted(n for n, c in load_all().items() if "independent" in c.demand_kinds
                             and "choice" not in c.demand_kinds)


def test_all_offered_is_the_sale_table_and_first_choice_by_hand():
    _, dem = parallel_flights()
    np.testing.assert_array_equal(independent_demand(dem).probabilities,
                                  dem.sale_probabilities())
    first = independent_demand(dem, "first_choice").probabilities[0]
    # segment 1 prefers p4 (weight 10, v0 = 1): 0.1 * 10/11; segment 2 prefers p5: 0.15 * 10/15;
    # segment 3 prefers p1: 0.2 * 10/15; segment 4 prefers p2: 0.05 * 10/11 (by hand)
    np.testing.assert_allclose(first, [0.2 * 10 / 15, 0.05 * 10 / 11, 0, 0.1 * 10 / 11,
                                       0.15 * 10 / 15, 0], rtol=1e-15)


@pytest.mark.parametrize("name", INDEPENDENT_METHODS)
def test_every_independent_method_runs_on_choice_through_the_view(name):
    net, ind = small_problem()
    dem = ChoiceDemand.random_example(net, ind.n_periods, 4)
    view = get_solver(f"{name}:independent")
    if view.refusal_reason(net, dem) is not None:
        pytest.skip(view.refusal_reason(net, dem))
    res = view.solve(net, dem, seed=1)
    assert res.method == f"{name}:independent"
    assert res.message.startswith("assumes independent demand (approximation='all_offered')")
    assert res.payload["assumes_independent_demand"] == "all_offered"
    ds = res.to_dataset()
    assert ds.attrs["method"] == f"{name}:independent"
    assert '"approximation": "all_offered"' in ds.attrs["parameters"]
    assert not (view.tags.exact or view.tags.upper_bound or view.tags.reference)
    assert view.tags.control == get_solver(name).tags.control


def test_same_numbers_as_the_method_on_the_approximation():
    net, _ = parallel_flights(0.6)
    _, dem = parallel_flights(0.6)
    direct = get_solver("dlp", dual="min").solve(net, independent_demand(dem, "first_choice"))
    view = get_solver("dlp:independent", dual="min", approximation="first_choice").solve(net, dem)
    assert view.value == direct.value
    np.testing.assert_array_equal(view["bid_price"], direct["bid_price"])


def test_settings_pickle_and_errors():
    view = IndependentView("emsrb", approximation="first_choice")
    clone = pickle.loads(pickle.dumps(view))
    assert clone.get_params() == view.get_params() and clone.name == "emsrb:independent"
    with pytest.raises(InputError, match="valid parameters"):
        get_solver("dlp:independent", nope=1)
    with pytest.raises(InputError, match="cdlp does not solve independent demand"):
        get_solver("cdlp:independent")
    with pytest.raises(InputError, match="unknown method 'nothing'"):
        get_solver("nothing:independent")
    net, dem = parallel_flights(0.6)
    with pytest.raises(InputError, match="approximation"):
        get_solver("dlp:independent", approximation="other").solve(net, dem)


def test_ignoring_choice_costs_revenue_on_parallel_flights():
    """On parallel flights (Liu & van Ryzin 2008) the choice methods beat the independent-demand
    views of the same ideas (our measurement, 1500 common paths; gaps of hundreds of SEs)."""
    net, dem = parallel_flights(0.6)
    mean = {m: float(simulate(net, dem, m, paths=1500, seed=6).revenue_mean)
            for m in ("cdpd", "dpd:independent", "exact", "exact:independent")}
    assert mean["exact"] > mean["exact:independent"]
    assert mean["cdpd"] > mean["dpd:independent"]
