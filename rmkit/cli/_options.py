"""Options every command spells the same way: run defaults, method settings, quiet, --csv.

``--param`` has one syntax everywhere: ``METHOD.NAME=VALUE``; a bare ``NAME=VALUE`` is valid where
the command names exactly one method. VALUE is read as JSON when it parses (``500``, ``true``,
``"normal"``), else kept as text.
"""

from __future__ import annotations

import argparse
import json
from collections.abc import Sequence
from typing import Any

from rmkit.errors import InputError
from rmkit.workflows.defaults import RULES


def add_run_defaults(parser: argparse.ArgumentParser, *, resolve: bool = True,
                     paths_help: str = "simulated request streams per policy") -> None:
    """``--paths``, ``--resolve`` and ``--seed``, each stating its default rule."""
    parser.add_argument("--paths", type=int, default=None, metavar="N",
                        help=f"{paths_help} (default: {RULES['paths']})")
    if resolve:
        parser.add_argument("--resolve", type=int, default=None, metavar="K",
                            help="re-solve each policy at K equally spaced periods (default: "
                            f"{RULES['resolve']})")
    parser.add_argument("--seed", type=int, default=None, help=f"random seed (default: "
                        f"{RULES['seed']})")


def add_param(parser: argparse.ArgumentParser, *, one_method: bool) -> None:
    bare = " (or NAME=VALUE)" if one_method else " (or NAME=VALUE when one method is named)"
    parser.add_argument("--param", action="append", default=[], metavar="METHOD.NAME=VALUE",
                        help=f"a method setting{bare}, repeatable, e.g. lr.max_iterations=500; "
                        "VALUE is read as JSON when it parses")


def add_quiet(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--quiet", action="store_true",
                        help="no progress display and no status lines on stderr")


def add_csv(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--csv", default=None, metavar="FILE|FOLDER",
                        help="also write every table: FILE.csv (more tables go beside it as "
                        "FILE-<table>.csv), a FOLDER (one <table>.csv each; created if missing), "
                        "or FILE.parquet when pyarrow is installed")


def _value(raw: str) -> Any:
    try:
        return json.loads(raw)
    except json.JSONDecodeError:
        return raw


def method_settings(items: Sequence[str], methods: Sequence[str] | None,
                    option: str = "--param") -> dict[str, dict[str, Any]]:
    """``METHOD.NAME=VALUE`` items as method -> settings.

    ``methods`` are the methods the command runs (``None``: not known yet, e.g. every method);
    a bare ``NAME=VALUE`` belongs to the only one of them, and is refused otherwise.
    """
    out: dict[str, dict[str, Any]] = {}
    only = list(methods) if methods is not None else []
    for item in items:
        key, sep, raw = item.partition("=")
        method, dot, name = key.strip().rpartition(".")
        if not sep or not name:
            raise InputError(f"{option}: expected METHOD.NAME=VALUE, got {item!r}")
        if not dot:
            if len(only) != 1:
                raise InputError(f"{option}: {item!r} does not say which method it is for; write "
                                 f"METHOD.{name}={raw}")
            method = only[0]
        elif methods is not None and method not in only:
            raise InputError(f"{option}: {item!r} is for method {method!r}, which is not run here "
                             f"({', '.join(only)})")
        out.setdefault(method, {})[name] = _value(raw)
    return out


def one_method_settings(items: Sequence[str], method: str,
                        option: str = "--param") -> dict[str, Any]:
    """Settings of the one method a command runs (bare or ``METHOD.`` names)."""
    return method_settings(items, [method], option).get(method, {})
