"""The notebooks run top to bottom (so they never rot) and are stored without outputs."""

from __future__ import annotations

from pathlib import Path

import nbformat
import pytest
from nbclient import NotebookClient

NOTEBOOKS = sorted((Path(__file__).resolve().parents[1] / "notebooks").glob("*.ipynb"))


@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.name for p in NOTEBOOKS])
def test_notebook_runs_and_is_stripped(path: Path) -> None:
    notebook = nbformat.read(path, as_version=4)
    stored = [c for c in notebook.cells if c.cell_type == "code" and c.get("outputs")]
    assert not stored, f"{path.name} is stored with outputs; clear them before committing"
    NotebookClient(notebook, timeout=600, kernel_name="python3").execute()
    errors = [
        o
        for c in notebook.cells
        if c.cell_type == "code"
        for o in c.outputs
        if o.output_type == "error"
    ]
    assert not errors


def test_there_is_a_notebook() -> None:
    assert NOTEBOOKS
