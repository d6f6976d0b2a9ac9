"""Every notebook runs top to bottom in a fresh kernel (its own cells assert their outcomes)."""

from __future__ import annotations

import shutil
from pathlib import Path

import nbformat
import pytest
from nbclient import NotebookClient

NOTEBOOKS = sorted((Path(__file__).resolve().parents[1] / "notebooks").glob("[0-9]*.ipynb"))


def test_there_are_five_notebooks():
    assert [p.name[:2] for p in NOTEBOOKS] == ["01", "02", "03", "04", "05"]


@pytest.mark.slow
@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.stem for p in NOTEBOOKS])
def test_notebook_runs_clean(path, tmp_path):
    # run a copy inside a copy of the repository layout so relative paths ("../demo_data")
    # resolve and whatever the notebook writes stays in tmp
    root = path.parents[1]
    work = tmp_path / "notebooks"
    work.mkdir()
    shutil.copytree(root / "demo_data", tmp_path / "demo_data")
    nb = nbformat.read(path, as_version=4)
    client = NotebookClient(nb, timeout=600, kernel_name="python3",
                            resources={"metadata": {"path": str(work)}})
    client.execute()
    errors = [o for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", [])
              if o.get("output_type") == "error"]
    assert not errors
