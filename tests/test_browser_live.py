"""Live refine in a real JupyterLab on ariane136 with its SRAMs movable: a macro dragged with the
mouse in headless Chromium; the readouts follow the drop at once and the refine lands later.

The notebook (``tests/browser/live_widget.ipynb``, written by ``make_notebook.py``) logs on the
kernel's clock when the drop began and returned, each Session change and each readout redraw.
Checked: the readouts show the dropped floorplan's HPWL within the drop budget (0.5 s, the
issue's p95 target for drag to readout; one drop, so the bound is the p95 one), the drop returned
before the refine landed (the kernel was not held), the refine joined the drop's undo step, and
the readouts' whole report after it equals :func:`floorwidget.evaluate` of the same floorplan.
In the page, the HPWL cell's text changes after the mouse is released (time printed; the page
adds the websocket and the browser's layout to the kernel's figure, so it is bounded loosely).
Speed targets themselves are measured by ``benchmarks/bench_session.py --drag``.
"""

from __future__ import annotations

import json
import shutil
import time
from pathlib import Path

import numpy as np
import pytest
import test_browser as tb

LIVE_NOTEBOOK = Path(__file__).resolve().parent / "browser" / "live_widget.ipynb"
DROP_BUDGET_S = 0.5   # drag to readout, p95 target of the live-refine work
PAGE_BOUND_S = 3.0    # mouse release to the HPWL cell's new text in the page (loose)

pytestmark = [
    pytest.mark.browser,
    pytest.mark.slow,
    pytest.mark.skipif(not tb.CHROMIUM.exists(), reason="Debian's /usr/bin/chromium is missing"),
    pytest.mark.skipif(not tb.REAL.is_dir(), reason="../shared/realdata/ariane136 not present"),
]

lab = tb.lab
browser = tb.browser


def _target(st: dict, pts: list) -> tuple[int, np.ndarray]:
    """A handle well apart from the others and a move of 30 px (diagonal) that puts its macro,
    with its halo, onto free room inside the core: (handle index, move in screen pixels)."""
    px = np.array(pts, dtype=float)
    c = np.array(st["centres"], dtype=float)
    i, j = int(np.argmin(c[:, 0] + c[:, 1])), int(np.argmax(c[:, 0] + c[:, 1]))
    sx = (px[j, 0] - px[i, 0]) / (c[j, 0] - c[i, 0])
    sy = (px[j, 1] - px[i, 1]) / (c[j, 1] - c[i, 1])
    r = np.array(st["rects"], dtype=float)
    core = np.array(st["core"], dtype=float)
    dist = np.hypot(px[:, None, 0] - px[None, :, 0], px[:, None, 1] - px[None, :, 1])
    np.fill_diagonal(dist, np.inf)
    for k in np.argsort(-dist.min(axis=1)):
        for step in ((30, 30), (30, -30), (-30, 30), (-30, -30)):
            d_um = np.array([step[0] / sx, step[1] / sy])
            a = r[k] + np.r_[d_um, d_um]
            others = np.delete(r, k, axis=0)
            hit = ((others[:, 0] < a[2]) & (a[0] < others[:, 2]) & (others[:, 1] < a[3])
                   & (a[1] < others[:, 3])).any()
            if not hit and (a[:2] >= core[:2] + 1).all() and (a[2:] <= core[2:] - 1).all():
                return int(k), np.array(step, dtype=float)
    raise AssertionError("no macro of ariane136 has free room for a 30 px drag")


def _live_check(page, lab, artifacts):
    state_path = lab["root"] / "state.json"
    st0, pts = tb._open_notebook(page, lab, LIVE_NOTEBOOK)
    k, step = _target(st0, pts)
    name = st0["macros"][k]
    hpwl_cell = page.locator(".fw-readouts td.fw-hpwl").first
    before = hpwl_cell.inner_text()
    x0, y0 = pts[k]
    page.mouse.move(x0, y0)
    page.mouse.down()
    for t in np.linspace(0, 1, 10)[1:]:
        page.mouse.move(x0 + t * step[0], y0 + t * step[1])
        page.wait_for_timeout(30)
    shown = hpwl_cell.inner_text()  # the drag preview's figure; the drop's comes after
    t_up = time.perf_counter()
    page.mouse.up()
    page.wait_for_function("([sel, a, b]) => { const t = document.querySelector(sel);"
                           " return t && t.innerText !== a && t.innerText !== b; }",
                           arg=[".fw-readouts td.fw-hpwl", before, shown], timeout=30_000)
    page_s = time.perf_counter() - t_up
    st = tb._wait_state(state_path, lambda s: any(e[0] == "readout" and e[2]
                                                  and len(e) > 4 for e in s["events"]),
                        120, "the refine and the whole report after it")
    ev = st["events"]
    t_drop = next(e[1] for e in ev if e[0] == "drop")
    t_back = next(e[1] for e in ev if e[0] == "dropped")
    first = next(e for e in ev if e[0] == "readout" and e[1] > t_drop)
    landed = next(e[1] for e in ev if e[0] == "change" and e[2] == "refine")
    whole = next(e for e in ev if e[0] == "readout" and e[2] and len(e) > 4)
    canvas = next(e for e in ev if e[0] == "canvas" and e[1] > t_drop)
    print(f"ariane136 live drag of {name}: readout {1e3 * (first[1] - t_drop):.0f} ms after "
          f"the drop began (kernel), drop returned {1e3 * (t_back - t_drop):.0f} ms, refine "
          f"landed {1e3 * (landed - t_drop):.0f} ms, whole report {1e3 * (whole[1] - t_drop):.0f}"
          f" ms (canvas redrawn {1e3 * (canvas[1] - t_drop):.0f}–"
          f"{1e3 * (canvas[2] - t_drop):.0f} ms); in the page {1e3 * page_s:.0f} ms from "
          "mouse release")
    assert first[1] - t_drop <= DROP_BUDGET_S, ev
    during = [e for e in ev if e[0] == "readout" and e[1] < t_drop]  # the drag's previews
    assert during and first[3] != during[-1][3], ev  # the dropped floorplan's HPWL
    assert t_back < landed, ev  # the drop did not wait for the placer
    assert whole[4] is True, ev  # the staged report ended equal to evaluate
    assert page_s <= PAGE_BOUND_S, page_s
    assert st["undo"][-1] == f"drag {name}", st["undo"]  # the refine joined the drop's step
    assert "Refine skipped" not in st["message"], st["message"]
    moved = np.subtract(st["positions"][name], st0["positions"][name])
    assert np.hypot(*moved) > 5.0, moved
    page.screenshot(path=str(artifacts / "browser_ariane136_live.png"), full_page=False)


def test_live_drag_on_ariane136_updates_readouts_within_budget(lab, browser, artifacts):
    from conftest import ariane136_files

    path, lefs = ariane136_files()
    (lab["root"] / "real.json").write_text(json.dumps(
        {"def": str(path), "lef": [str(p) for p in lefs]}))
    shutil.copy(LIVE_NOTEBOOK, lab["root"] / LIVE_NOTEBOOK.name)
    tb._on_new_page(browser, _live_check, lab, artifacts, "browser_ariane136_live_failure.png")
