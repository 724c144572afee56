"""What a command prints and writes: tables (printed, and exported with --csv), provenance,
and solver warnings summarised once per method.

A :class:`Table` holds raw values (numbers stay numbers in the CSV); printing formats each
column with its format spec.
"""

from __future__ import annotations

import math
import sys
import warnings
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from rmkit.errors import InputError

CAUTION = (
    "Results are model estimates under the stated demand model; validate them before using "
    "them to steer real sales."
)
TABLE_SUFFIXES = (".csv", ".parquet")


@dataclass
class Table:
    """One table: ``name`` is its file stem under --csv; ``formats`` a format spec per column
    (``None``: the default number format)."""

    name: str
    title: str
    columns: list[str]
    rows: list[list[Any]]
    formats: list[str | None] = field(default_factory=list)
    note: str = ""
    #: What is printed when it differs from the CSV: columns and rows of text (several CSV
    #: columns, e.g. a value and its interval, read better as one printed cell).
    shown_columns: list[str] | None = None
    shown: list[list[str]] | None = None

    def printed(self) -> tuple[list[str], list[list[str]]]:
        if self.shown is not None:
            return self.shown_columns or self.columns, self.shown
        return self.columns, [[self.cell(k, v) for k, v in enumerate(r)] for r in self.rows]

    def cell(self, k: int, v: Any) -> str:
        spec = self.formats[k] if k < len(self.formats) else None
        if v is None or (isinstance(v, (float, np.floating)) and math.isnan(float(v))):
            return "-"
        if spec and isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool):
            f = float(v)
            if math.isinf(f):
                return "inf" if f > 0 else "-inf"
            return format(int(v) if spec.endswith("d") else f, spec)
        return fmt(v)


def _is_text(cell: str) -> bool:
    """A cell that reads as words (left-aligned), not a number, a dash or an interval."""
    return any(c.isalpha() for c in cell) and cell not in ("inf", "-inf", "yes", "no")


def fmt(v: Any) -> str:
    from rmkit.cli._common import fmt as number

    if isinstance(v, bool):
        return "yes" if v else "no"
    return number(v)


def console(stderr: bool = False):
    """A rich console; to pipes and files wide enough that no cell wraps."""
    from rich.console import Console

    out = Console(stderr=stderr)
    return out if out.is_terminal else Console(width=200, stderr=stderr)


def print_tables(tables: Sequence[Table], notes: Sequence[str] = ()) -> None:
    from rich.markup import escape
    from rich.table import Table as RichTable

    out = console()
    for t in tables:
        table = RichTable(title=escape(t.title), title_justify="left")
        columns, rows = t.printed()
        for k, col in enumerate(columns):
            text = any(_is_text(r[k]) for r in rows)
            table.add_column(escape(col), justify="left" if k == 0 or text else "right")
        for row in rows:
            table.add_row(*[escape(c) for c in row])
        out.print(table)
        if t.note:
            out.print(escape(t.note), style="dim")
    if notes:
        out.print(escape("\n".join(notes)), style="dim")


# ---------------------------------------------------------------- --csv
def check_table_target(target: str | None) -> None:
    """Refuse a --csv target that cannot be written, before any work starts."""
    if target is None:
        return
    from rmkit.files import check_output

    if target.strip() == "-":  # would otherwise become a folder named '-'
        raise InputError("--csv: '-' (standard output) is not a table target; give FILE.csv, "
                         "FILE.parquet or a folder, or use --json for output on stdout")
    p = Path(target)
    if p.suffix.lower() in TABLE_SUFFIXES:
        check_output(p, "--csv", TABLE_SUFFIXES)
        if p.suffix.lower() == ".parquet":
            _parquet_engine()
    elif p.exists() and not p.is_dir():
        raise InputError(f"--csv: {target!r} is a file without .csv or .parquet; give FILE.csv, "
                         "FILE.parquet or a folder")
    elif not p.exists():
        parent = p.parent if str(p.parent) else Path(".")
        if not parent.is_dir():
            raise InputError(f"--csv: folder {str(parent)!r} does not exist; create it or pick "
                             "another path")


def _parquet_engine() -> None:
    try:
        import pyarrow  # noqa: F401
    except ImportError:
        raise InputError("--csv: writing .parquet needs pyarrow (pip install pyarrow); or give "
                         "FILE.csv or a folder") from None


def table_paths(tables: Sequence[Table], target: str) -> list[Path]:
    """Where each table goes: FILE for the first and FILE-<name> beside it, or FOLDER/<name>."""
    p = Path(target)
    if p.suffix.lower() in TABLE_SUFFIXES:
        return [p if k == 0 else p.with_name(f"{p.stem}-{t.name}{p.suffix}")
                for k, t in enumerate(tables)]
    return [p / f"{t.name}.csv" for t in tables]


def write_tables(tables: Sequence[Table], target: str | None) -> list[Path]:
    """Write every table to ``target`` (see :func:`table_paths`); return the paths written."""
    if target is None or not tables:
        return []
    import pandas as pd

    from rmkit.files import write_atomically

    paths = table_paths(tables, target)
    if Path(target).suffix.lower() not in TABLE_SUFFIXES:
        Path(target).mkdir(exist_ok=True)
    for t, path in zip(tables, paths, strict=True):
        frame = pd.DataFrame([[_plain(v) for v in row] for row in t.rows], columns=t.columns)
        if path.suffix.lower() == ".parquet":
            write_atomically(path, lambda tmp, f=frame: f.to_parquet(tmp, index=False), "--csv")
        else:
            write_atomically(path, lambda tmp, f=frame: f.to_csv(tmp, index=False), "--csv")
    return paths


def _plain(v: Any) -> Any:
    if isinstance(v, np.generic):
        return v.item()
    return v


# ---------------------------------------------------------------- provenance
def stamp(ds, scenario) -> None:
    """Add provenance attrs (scenario sha256 and copy, versions, platform, UTC time) to ``ds``."""
    from rmkit.provenance import as_attrs, provenance

    ds.attrs.update(as_attrs(provenance(scenario)))


def provenance_json(scenario) -> dict[str, Any]:
    from rmkit.provenance import provenance

    return provenance(scenario)


# ---------------------------------------------------------------- warnings
@contextmanager
def warnings_summarised(command: str) -> Iterator[list[warnings.WarningMessage]]:
    """Collect the warnings of a run and print one line per source on stderr at the end.

    A source is the method or policy the message starts with (``lr: ...``), else ``rmkit``.
    """
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            yield caught
        finally:
            for line in summary_lines(command, [str(w.message) for w in caught]):
                print(line, file=sys.stderr)


def summary_lines(command: str, messages: Sequence[str]) -> list[str]:
    from rmkit.workflows.warnings_log import by_source, summary

    return [f"rmkit {command}: {source}: {summary(found)}"
            for source, found in by_source(messages).items()]
