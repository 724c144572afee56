"""The public API is what rmkit/__init__.py names; heavy modules load only when used."""

from __future__ import annotations

import subprocess
import sys

import pytest

import rmkit


def test_every_public_name_resolves():
    for name in rmkit.__all__:
        assert getattr(rmkit, name) is not None, name


def test_workflow_functions_are_the_modules_own():
    from rmkit.workflows.policy_comparison import compare_policies
    from rmkit.workflows.sweep import open_sweep

    assert rmkit.compare_policies is compare_policies
    assert rmkit.open_sweep is open_sweep
    with pytest.raises(AttributeError, match="no_such_name"):
        rmkit.no_such_name  # noqa: B018


def test_import_and_info_do_not_load_heavy_modules():
    """`rmkit info` is called many times by scripts: it must not import xarray, numba or HiGHS."""
    code = (
        "import sys, rmkit.cli, rmkit.cli.info;"
        "print(sorted(m for m in ('xarray', 'numba', 'highspy', 'cvxpy', 'dask') if m in sys.modules))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "[]"
