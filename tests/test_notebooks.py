"""The validation notebooks run end to end (small sizes) and their .ipynb matches the .py source.

Each notebook asserts its own checks (the exact policy's simulated revenue against V(c), bounds
against Topaloglu (2009) Tables 1 and 2), so running it is a test of the numbers, not only of the
code paths.
"""

from __future__ import annotations

import os

import pytest

from tests.conftest import ROOT

NOTEBOOKS = ROOT / "notebooks"
NAMES = ["heuristics_vs_optimum", "bounds_and_policies_public", "choice_validation"]

nbformat = pytest.importorskip("nbformat")
jupytext = pytest.importorskip("jupytext")
nbclient = pytest.importorskip("nbclient")


@pytest.mark.parametrize("name", NAMES)
def test_paired_ipynb_matches_its_source(name):
    source = jupytext.read(NOTEBOOKS / f"{name}.py")
    stored = nbformat.read(NOTEBOOKS / f"{name}.ipynb", as_version=4)
    assert [(c.cell_type, c.source) for c in source.cells] == [
        (c.cell_type, c.source) for c in stored.cells
    ], f"run: jupytext --sync notebooks/{name}.py"


@pytest.mark.parametrize("name", NAMES)
def test_notebook_runs(name, monkeypatch):
    monkeypatch.setenv("RMKIT_NOTEBOOK_SIZE", "small")
    monkeypatch.setenv("MPLBACKEND", "Agg")
    path = os.pathsep.join(p for p in (str(ROOT), os.environ.get("PYTHONPATH", "")) if p)
    monkeypatch.setenv("PYTHONPATH", path)
    nb = jupytext.read(NOTEBOOKS / f"{name}.py")
    caution = [c for c in nb.cells if c.cell_type == "markdown" and "Caution" in c.source]
    assert caution and "production" in caution[0].source
    client = nbclient.NotebookClient(nb, timeout=600, kernel_name="python3",
                                     resources={"metadata": {"path": str(NOTEBOOKS)}})
    client.execute()
    errors = [o for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", [])
              if o.get("output_type") == "error"]
    assert not errors
