"""Networks and forecasts from CSV files: the same model and the same checks as the TOML form."""

from __future__ import annotations

import math

import numpy as np
import pytest

from rmkit.errors import InputError
from rmkit.model.scenario import load_scenario
from tests.conftest import ROOT

LEGS = "id,capacity,name\nA,3,first leg\nB,2,\n"
PRODUCTS = ("id,fare,legs,fare_class\nA1,100,A,high\nA2,40,A,low\nAB,130,A;B,high\n"
            "B1,60,B,low\n")
TOML_NETWORK = """
[[leg]]
id = "A"
capacity = 3
name = "first leg"

[[leg]]
id = "B"
capacity = 2

[[product]]
id = "A1"
fare = 100.0
legs = ["A"]
fare_class = "high"

[[product]]
id = "A2"
fare = 40.0
legs = ["A"]
fare_class = "low"

[[product]]
id = "AB"
fare = 130.0
legs = ["A", "B"]
fare_class = "high"

[[product]]
id = "B1"
fare = 60.0
legs = ["B"]
fare_class = "low"
"""
#: (period, product, value): at most one request per period, as the model needs.
PER_PERIOD = [(0, "A2", 0.4), (0, "B1", 0.3), (1, "A1", 0.25), (1, "AB", 0.5), (2, "A1", 0.6),
              (3, "AB", 0.1), (3, "B1", 0.2), (3, "A2", 0.05)]


def _write(folder, name, text):
    (folder / name).write_text(text)
    return folder / name


def _csv_scenario(folder, forecast: str, **extra) -> object:
    _write(folder, "legs.csv", LEGS)
    _write(folder, "products.csv", PRODUCTS)
    _write(folder, "forecast.csv", forecast)
    lines = ["[scenario]", 'name = "csv"', "", "[csv]", 'legs = "legs.csv"',
             'products = "products.csv"', 'forecast = "forecast.csv"']
    lines += [f"{k} = {v!r}" if isinstance(v, str) else f"{k} = {v}" for k, v in extra.items()]
    path = _write(folder, "scen.toml", "\n".join(lines).replace("'", '"') + "\n")
    return load_scenario(path)


def test_forecast_by_period_equals_the_toml_form(tmp_path):
    rows = "\n".join(f"{p},{t},{v}" for t, p, v in PER_PERIOD)
    from_csv = _csv_scenario(tmp_path, f"product,period,value\n{rows}\n",
                             values="probability")
    requests = "\n".join(f'[[demand.request]]\nperiod = {t}\nproduct = "{p}"\nprobability = {v}\n'
                         for t, p, v in PER_PERIOD)
    toml = _write(tmp_path, "same.toml", TOML_NETWORK + "\n[demand]\nperiods = 4\n" + requests)
    from_toml = load_scenario(toml)
    np.testing.assert_array_equal(from_csv.demand.probabilities, from_toml.demand.probabilities)
    assert from_csv.network.product_ids == from_toml.network.product_ids
    np.testing.assert_array_equal(from_csv.network.incidence, from_toml.network.incidence)
    np.testing.assert_array_equal(from_csv.network.fares, from_toml.network.fares)
    assert [leg.name for leg in from_csv.network.legs] == ["first leg", ""]
    # expected requests per period are the same numbers in the one-request-per-period model
    same = _csv_scenario(tmp_path, f"product,period,value\n{rows}\n", values="expected")
    np.testing.assert_array_equal(same.demand.probabilities, from_toml.demand.probabilities)


def test_forecast_by_days_before_departure_spreads_each_bucket_evenly(tmp_path):
    # 10 days in 0.5-day periods = 20 periods; period t covers 10 - t/2 .. 10 - (t+1)/2 days out
    forecast = ("product,days_before_from,days_before_to,value\nA2,10,4,3.0\nA1,4,0,2.0\n"
                "AB,10,0,5.0\nB1,2,0,0.5\n")
    scen = _csv_scenario(tmp_path, forecast, period_days=0.5)
    p = scen.demand.probabilities
    expected = np.zeros((20, 4))
    expected[0:12, 1] = 3.0 / 12  # 10 to 4 days out: periods 0..11
    expected[12:20, 0] = 2.0 / 8  # 4 to 0 days out: periods 12..19
    expected[:, 2] = 5.0 / 20
    expected[16:20, 3] = 0.5 / 4
    np.testing.assert_allclose(p, expected, rtol=0, atol=1e-15)
    # the totals of the sheet are the expected requests of the model
    np.testing.assert_allclose(scen.demand.demand_to_come(0), [2.0, 3.0, 5.0, 0.5])


def test_a_horizon_too_short_for_one_request_per_period_is_refused_with_what_works(tmp_path):
    forecast = "product,days_before_from,days_before_to,value\nA1,2,0,6\nA2,2,0,4\n"
    with pytest.raises(InputError, match="at most one per period") as err:
        _csv_scenario(tmp_path, forecast, period_days=0.5)  # 4 periods, 2.5 requests in each
    text = str(err.value)
    days = float(text.split("at most ")[2].split(" days")[0])
    assert days == pytest.approx(0.5 / 2.5) and "at least 10 periods" in text
    fine = _csv_scenario(tmp_path, forecast, period_days=days)
    assert fine.demand.n_periods == 10
    assert math.isclose(float(fine.demand.probabilities.sum(axis=1).max()), 1.0)


@pytest.mark.parametrize("forecast, extra, needle", [
    ("product,period,value\nZZ,0,0.1\n", {}, "line 2, product: unknown product 'ZZ'"),
    ("product,period,value\nA1,0,abc\n", {}, "line 2, value: must be a finite number"),
    ("product,period,value\nA1,0,1.5\n", {"values": "probability"}, "must be in [0, 1]"),
    ("product,period,value\nA1,7,0.1\n", {"periods": 4}, "line 2, period: must be in [0, 3]"),
    ("product,when,value\nA1,0,0.1\n", {}, "missing column 'period'"),
    ("product,days_before_from,days_before_to,value\nA1,3,5,1\n", {"period_days": 1},
     "days_before_from > days_before_to"),
    ("product,days_before_from,days_before_to,value\nA1,3,0.3,1\n", {"period_days": 1},
     "does not fall on the 1-day periods"),
])
def test_bad_forecast_cells_name_the_file_line_and_column(tmp_path, forecast, extra, needle):
    with pytest.raises(InputError, match="forecast.csv") as err:
        _csv_scenario(tmp_path, forecast, **extra)
    assert needle in str(err.value)


def test_network_sheet_errors_name_the_line(tmp_path):
    _write(tmp_path, "legs.csv", "id,capacity\nA,3\nB,two\n")
    with pytest.raises(InputError, match=r"legs.csv line 3, capacity: must be a whole number"):
        _csv_scenario_raw(tmp_path)
    _write(tmp_path, "legs.csv", LEGS)
    _write(tmp_path, "products.csv", PRODUCTS + "C1,50,C,low\n")
    with pytest.raises(InputError, match=r"products.csv line 6, legs: product 'C1' uses unknown "
                                         r"leg 'C'"):
        _csv_scenario_raw(tmp_path)


def _csv_scenario_raw(folder):
    _write(folder, "forecast.csv", "product,period,value\nA1,0,0.1\n")
    path = _write(folder, "scen.toml", '[csv]\nlegs = "legs.csv"\nproducts = "products.csv"\n'
                  'forecast = "forecast.csv"\n')
    return load_scenario(path)


def test_the_example_sheet_loads_with_its_totals():
    scen = load_scenario(ROOT / "examples" / "harrowby.toml")
    assert scen.demand.n_periods == 240 and scen.network.n_legs == 2
    totals = dict(zip(scen.network.product_ids, scen.demand.demand_to_come(0), strict=True))
    # sums of the value column of examples/harrowby_forecast.csv, product by product
    assert totals["WC-advance"] == pytest.approx(26.0) and totals["WH-open"] == pytest.approx(11.0)
    assert scen.spec.defaults.seed == 11
