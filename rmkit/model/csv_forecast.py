"""A network and a demand forecast kept in CSV files (a spreadsheet), named by a scenario TOML.

The scenario file keeps its ``[scenario]`` and ``[defaults]`` tables and names the CSV files in
a ``[csv]`` table, relative to the TOML file::

    [csv]
    legs = "legs.csv"              # id, capacity, name (optional)             (or [[leg]])
    products = "products.csv"      # id, fare, legs, fare_class, origin,        (or [[product]])
                                   #   destination, name (all but id, fare, legs optional);
                                   #   legs separated by spaces or ';'
    forecast = "forecast.csv"      # demand per product and booking period, or per
                                   #   days-before-departure bucket (below)
    values = "expected"            # "expected" requests, or arrival "probability" per period
    periods = 240                  # booking periods (per-period forecast: default last + 1)
    period_days = 0.25             # length of one period in days (bucket forecast)

Forecast layouts (by the header):

* ``product,period,value``: period is the 0-based booking period; ``value`` is the probability of
  a request for the product in that period (``values = "probability"``) or the expected requests
  in it (``"expected"``, the same number in the discrete-time model, where at most one request
  arrives per period).
* ``product,days_before_from,days_before_to,value``: a bucket from ``days_before_from`` down to
  ``days_before_to`` days before departure (e.g. 30 to 14). With one period ``period_days``
  long, the horizon ``H`` (the largest ``days_before_from``) has ``H / period_days`` periods and
  period t covers ``H - t d`` to ``H - (t + 1) d`` days before departure; bucket edges must fall
  on period edges. ``expected`` requests are spread evenly over the bucket's periods; a
  ``probability`` applies to each of its periods.

Rows missing for a product and period mean no demand there; rows for the same product and period
add up. The forecast becomes the dense probability table of independent demand
(:mod:`rmkit.model.independent`), so it passes the same checks as a TOML scenario, and a horizon
too short to keep at most one request per period is refused with the period length it needs.
Messages name the CSV file, its line and column.
"""

from __future__ import annotations

import csv
import math
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np

from rmkit.errors import InputError

LEG_COLUMNS = ("id", "capacity", "name")
PRODUCT_COLUMNS = ("id", "fare", "legs", "fare_class", "origin", "destination", "name")
PERIOD_COLUMNS = ("product", "period", "value")
BUCKET_COLUMNS = ("product", "days_before_from", "days_before_to", "value")
CSV_KEYS = ("legs", "products", "forecast", "values", "periods", "period_days")
VALUE_KINDS = ("expected", "probability")
#: Slack for bucket edges that should fall on period edges (floating-point day counts).
EDGE_SLACK = 1e-6


def _rows(path: Path, required: tuple[str, ...], optional: tuple[str, ...] = ()
          ) -> list[tuple[int, dict[str, str]]]:
    """(line number, row) of a CSV file with a header; unknown or missing columns refused."""
    if not path.is_file():
        raise InputError(f"{path}: no such CSV file; check the [csv] table of the scenario")
    try:
        with path.open(newline="", encoding="utf-8-sig") as fh:
            reader = csv.DictReader(fh)
            header = [h.strip() for h in (reader.fieldnames or [])]
            missing = [c for c in required if c not in header]
            unknown = [c for c in header if c not in required + optional]
            if missing or unknown:
                what = (f"missing column {missing[0]!r}" if missing
                        else f"unknown column {unknown[0]!r}")
                raise InputError(f"{path}: {what}; columns: {', '.join(required)}"
                                 + (f" (optional: {', '.join(optional)})" if optional else ""))
            out = []
            for row in reader:
                clean = {(k or "").strip(): (v or "").strip() for k, v in row.items()}
                if any(clean.values()):
                    out.append((reader.line_num, clean))
            return out
    except UnicodeDecodeError:
        raise InputError(f"{path}: not a UTF-8 text file; save the sheet as CSV (UTF-8)") from None
    except csv.Error as err:
        raise InputError(f"{path}: malformed CSV ({err})") from None


def _number(path: Path, line: int, column: str, text: str, *, whole: bool = False) -> float:
    try:
        value = float(text)
    except ValueError:
        value = math.nan
    if not math.isfinite(value) or (whole and value != round(value)):
        kind = "a whole number" if whole else "a finite number"
        raise InputError(f"{path} line {line}, {column}: must be {kind}, got {text!r}")
    return value


def _legs(path: Path) -> tuple[list[dict[str, Any]], list[int]]:
    rows = _rows(path, LEG_COLUMNS[:2], LEG_COLUMNS[2:])
    return [{"id": r["id"], "capacity": int(_number(path, line, "capacity", r["capacity"],
                                                    whole=True)),
             **({"name": r["name"]} if r.get("name") else {})}
            for line, r in rows], [line for line, _ in rows]


def _products(path: Path) -> tuple[list[dict[str, Any]], list[int]]:
    rows = _rows(path, PRODUCT_COLUMNS[:3], PRODUCT_COLUMNS[3:])
    out = []
    for line, r in rows:
        legs = [leg for leg in r["legs"].replace(";", " ").split() if leg]
        extra = {k: r[k] for k in PRODUCT_COLUMNS[3:] if r.get(k)}
        out.append({"id": r["id"], "fare": _number(path, line, "fare", r["fare"]),
                    "legs": legs, **extra})
    return out, [line for line, _ in rows]


def _located(err: InputError, table: str, path: Path, lines: list[int]) -> InputError:
    """``leg[2].capacity: ...`` from the TOML checks, as ``legs.csv line 4, capacity: ...``."""
    text = str(err)
    prefix = f"{table}["
    if text.startswith(prefix) and "]" in text:
        index, _, rest = text[len(prefix):].partition("]")
        if index.isdigit() and int(index) < len(lines):
            return InputError(f"{path} line {lines[int(index)]}, {rest.lstrip('.')}")
    return err


def forecast_table(path: Path, product_ids: list[str], values: str, periods: int | None,
                   period_days: float | None) -> np.ndarray:
    """The ``(T, n)`` request probabilities of a forecast CSV (see the module docstring)."""
    if values not in VALUE_KINDS:
        raise InputError(f"csv.values: must be one of {', '.join(VALUE_KINDS)}, got {values!r}")
    buckets = "days_before_from" in _header(path)
    rows = _rows(path, BUCKET_COLUMNS if buckets else PERIOD_COLUMNS)
    index = {pid: j for j, pid in enumerate(product_ids)}
    for line, r in rows:
        if r["product"] not in index:
            raise InputError(f"{path} line {line}, product: unknown product {r['product']!r}; "
                             f"known: {', '.join(product_ids)}")
        value = _number(path, line, "value", r["value"])
        if value < 0 or (values == "probability" and value > 1):
            rule = "in [0, 1]" if values == "probability" else ">= 0"
            raise InputError(f"{path} line {line}, value: a {values} must be {rule}, got {value!r}")
    if buckets:
        return _bucket_table(path, rows, index, values, periods, period_days)
    last = max((int(_number(path, line, "period", r["period"], whole=True)) for line, r in rows),
               default=-1)
    n_periods = periods if periods is not None else last + 1
    if n_periods < 1:
        raise InputError(f"{path}: no forecast rows; give one row per product and period")
    p = np.zeros((n_periods, len(product_ids)))
    for line, r in rows:
        t = int(_number(path, line, "period", r["period"], whole=True))
        if not 0 <= t < n_periods:
            raise InputError(f"{path} line {line}, period: must be in [0, {n_periods - 1}] "
                             f"(csv.periods = {n_periods}), got {t}")
        p[t, index[r["product"]]] += float(r["value"])
    _check_one_per_period(path, p, values, None)
    return p


def _header(path: Path) -> set[str]:
    if not path.is_file():
        raise InputError(f"{path}: no such CSV file; check the [csv] table of the scenario")
    with path.open(newline="", encoding="utf-8-sig") as fh:
        return {h.strip() for h in next(csv.reader(fh), [])}


def _bucket_table(path: Path, rows, index: dict[str, int], values: str, periods: int | None,
                  period_days: float | None) -> np.ndarray:
    spans = []
    for line, r in rows:
        start = _number(path, line, "days_before_from", r["days_before_from"])
        end = _number(path, line, "days_before_to", r["days_before_to"])
        if not start > end >= 0:
            raise InputError(f"{path} line {line}: a bucket runs from more days before departure "
                             f"to fewer (days_before_from > days_before_to >= 0), got {start:g} "
                             f"to {end:g}")
        spans.append((line, r, start, end))
    horizon = max(s for _, _, s, _ in spans)
    if period_days is None:
        if periods is None:
            raise InputError("csv.period_days: a forecast by days before departure needs the "
                             "length of one booking period in days (or csv.periods)")
        period_days = horizon / periods
    if not (math.isfinite(period_days) and period_days > 0):
        raise InputError(f"csv.period_days: must be a number of days > 0, got {period_days!r}")
    n_periods = round(horizon / period_days)
    if abs(n_periods * period_days - horizon) > EDGE_SLACK * max(horizon, 1.0):
        raise InputError(f"csv.period_days: the horizon of {horizon:g} days is not a whole number "
                         f"of {period_days:g}-day periods")
    p = np.zeros((n_periods, len(index)))
    for line, r, start, end in spans:
        first, stop = (horizon - start) / period_days, (horizon - end) / period_days
        if max(abs(first - round(first)), abs(stop - round(stop))) > EDGE_SLACK:
            raise InputError(f"{path} line {line}: bucket {start:g} to {end:g} days before "
                             f"departure does not fall on the {period_days:g}-day periods")
        first, stop = round(first), round(stop)
        value = float(r["value"])
        per_period = value / (stop - first) if values == "expected" else value
        p[first:stop, index[r["product"]]] += per_period
    _check_one_per_period(path, p, values, period_days)
    return p


def _check_one_per_period(path: Path, p: np.ndarray, values: str, period_days: float | None
                          ) -> None:
    """Refuse a table with more than one expected request in a period, saying what is needed."""
    sums = p.sum(axis=1)
    t = int(np.argmax(sums)) if sums.size else 0
    if not sums.size or sums[t] <= 1.0 + 1e-9:
        return
    worst = float(sums[t])
    if values == "probability":
        fix = "lower the probabilities, or give expected requests (csv.values = \"expected\")"
    elif period_days is not None:
        fix = (f"use periods of at most {period_days / worst:.4g} days (csv.period_days; at "
               f"least {math.ceil(p.shape[0] * worst)} periods)")
    else:
        fix = (f"split each period into {math.ceil(worst)} or more (the forecast by period has "
               "more than one request in a period)")
    raise InputError(f"{path}: period {t} gets {worst:.4g} expected requests, but the model allows "
                     f"at most one per period; {fix}")


def scenario_from_csv_tables(data: dict[str, Any], source: Path,
                             build: Callable[..., Any]) -> Any:
    """A scenario from a TOML whose ``[csv]`` table names CSV files (module docstring).

    ``build(data, source=...)`` makes the scenario from the completed TOML data (the scenario
    reader passes its own, so the same checks apply and this module need not import it)."""
    table = dict(data.get("csv") or {})
    unknown = [k for k in table if k not in CSV_KEYS]
    if unknown:
        raise InputError(f"csv: unknown field {unknown[0]!r}; valid fields: {', '.join(CSV_KEYS)}")
    folder = source.parent
    out = {k: v for k, v in data.items() if k != "csv"}
    located: dict[str, tuple[Path, list[int]]] = {}
    for key, toml_key, read in (("legs", "leg", _legs), ("products", "product", _products)):
        if key in table:
            if toml_key in out:
                raise InputError(f"csv.{key}: the {toml_key}s are given twice (CSV and "
                                 f"[[{toml_key}]]); keep one")
            path = folder / str(table[key])
            out[toml_key], lines = read(path)
            located[toml_key] = (path, lines)
    if "forecast" in table:
        if "demand" in out:
            raise InputError("csv.forecast: the demand is given twice (CSV and [demand]); keep one")
        ids = [str(p.get("id", "")) for p in out.get("product", [])]
        probs = forecast_table(folder / str(table["forecast"]), ids,
                               str(table.get("values", "expected")), table.get("periods"),
                               table.get("period_days"))
        out["demand"] = {"periods": int(probs.shape[0]),
                         "probabilities": [[float(v) for v in row] for row in probs]}
    try:
        return build(out, source=str(source))
    except InputError as err:
        for toml_key, (path, lines) in located.items():
            moved = _located(err, toml_key, path, lines)
            if moved is not err:
                raise moved from None
        raise
