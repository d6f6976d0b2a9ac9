"""Every notebook runs top to bottom in a fresh kernel.

Notebooks read as documentation, so their cells do not assert; the checks of what a notebook
shows live here (:data:`CHECKS`) and run as one more cell in the same kernel, after the notebook,
on the very objects it made.  Notebooks without an entry still must run without an error.
"""

from __future__ import annotations

import shutil
from pathlib import Path

import nbformat
import pytest
from nbclient import NotebookClient

NOTEBOOKS = sorted((Path(__file__).resolve().parents[1] / "notebooks").glob("[0-9]*.ipynb"))


CHECKS = {
    "02-macros-by-hand": """
hand_labels = ("hand + automatic", "free", "periphery")
for lab in hand_labels:  # pinned macros never move, bit for bit, whatever the layout
    alt = s.alternative(lab)
    assert all(alt.floorplan.position(n) == p for n, p in pinned.items()), lab
    assert alt.report["legal"], (lab, alt.report)
assert set(hand) & {m[0] for m in cmp.moved}, "the hand decisions differ from the automatic run"
assert s.alternative("periphery").floorplan.info["macro_layout"] == "periphery"
assert s.alternative("free").floorplan.info["macro_layout"] == "free"
""",
    "04-flow-walkthrough": """
from floorwidget.metrics import periphery_macros as _pm
assert 0.3 < util_left < 0.8, util_left      # a common-practice utilisation (section 1)
assert fp.info["overflow"] <= 0.10, fp.info  # the placer's stopping rule, on its own bins
assert rep["legal"], rep
assert all(r["legal"] for r in reports.values()), reports
assert len(_pm(design, layouts["periphery"])) >= len(_pm(design, layouts["free"]))
assert layouts["periphery"].info["macro_layout"] == "periphery"
""",
    "06-from-netlist": """
assert abs(by_hand - 0.6) <= 0.01 * 0.6, by_hand   # utilisation within 1 % of the request
assert counts["TRACKS"] == len(design.routing_layers), counts  # one per LEF routing layer
assert counts["SPECIALNETS"] == 1 and rep["legal"] and final["legal"], (counts, rep, final)
assert after["hpwl"] < rep["hpwl"]  # the assignment beats pins spread evenly
for _k in range(100):  # the constrained ports sit on the left or bottom die edge
    _x, _y = pinned.position(f"io_{_k}")
    assert abs(_x - design.die[0]) < 1.0 or abs(_y - design.die[1]) < 1.0, (_k, _x, _y)
""",
}


def test_there_are_six_notebooks():
    assert [p.name[:2] for p in NOTEBOOKS] == ["01", "02", "03", "04", "05", "06"]


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
    if path.stem in CHECKS:
        nb.cells.append(nbformat.v4.new_code_cell(CHECKS[path.stem]))
    client = NotebookClient(nb, timeout=600, kernel_name="python3",
                            resources={"metadata": {"path": str(work)}})
    client.execute()
    errors = [o for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", [])
              if o.get("output_type") == "error"]
    assert not errors, [f"{e.get('ename')}: {e.get('evalue')}" for e in errors]


def test_notebooks_02_and_04_leave_checks_to_the_tests():
    # documentation first: the outcomes are checked by CHECKS above, not by asserts in cells
    for path in NOTEBOOKS:
        if path.stem in CHECKS:
            nb = nbformat.read(path, as_version=4)
            code = "\n".join(c.source for c in nb.cells if c.cell_type == "code")
            assert "assert " not in code, path.name
