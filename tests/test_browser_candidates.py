"""The candidates view in a real JupyterLab (Debian's headless Chromium through Playwright): ask
for 3 candidates of the demo design, wait for their pictures, click one, and check from the
kernel side that it became the current floorplan and that the readouts show its figures.

The notebook is the drag test's (``tests/browser/make_notebook.py``) with one more observer that
writes the candidates' labels, figures and macro positions to ``cands.json``.  The placements
run on the sweeps' default process pool, as they do for a user.  The screenshot goes to
``tests/artifacts/browser_candidates.png`` (the README's picture is a copy of it).
"""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parent / "browser"))

import make_notebook  # noqa: E402
import nbformat  # noqa: E402
from test_browser import (  # noqa: E402, F401 - the fixtures are used by name
    CHROMIUM,
    _dismiss_news,
    _on_new_page,
    _open_notebook,
    _wait_state,
    browser,
    lab,
)

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not CHROMIUM.exists(), reason="Debian's /usr/bin/chromium is missing"),
]

#: Observer cell: what the test reads back from the kernel
CANDS = '''\
CANDS = HERE / "cands.json"

def write_cands(_ev=None):
    s = w.session
    st = {"labels": w.candidates.labels, "current": w.candidates.current,
          "alts": {a.label: {"hpwl": a.report["hpwl"],
                             "positions": {n: list(a.floorplan.position(n))
                                           for n in design.macros}}
                   for a in s.alternatives},
          "figures": [c.children[2].value for c in w.candidates.cards.children]}
    tmp = CANDS.with_suffix(".tmp")
    tmp.write_text(json.dumps(st, default=float))
    tmp.replace(CANDS)

w.session.on_change(write_cands)
w.candidates.cards.observe(lambda _c: write_cands(), "children")
write_cands()
'''


def test_candidates_side_by_side_and_click_in_real_browser(lab, browser, artifacts):  # noqa: F811
    nb = make_notebook._notebook((make_notebook.SETUP, make_notebook.STATE, CANDS,
                                  make_notebook.SHOW, make_notebook.READY))
    path = lab["root"] / "candidates_widget.ipynb"
    nbformat.write(nb, path)
    _on_new_page(browser, lambda page, lab, art: _candidates_check(page, lab, art, path), lab,
                 artifacts, "browser_candidates_failure.png")


def _candidates_check(page, lab, artifacts, notebook: Path):  # noqa: F811
    from floorwidget.kernels import fmt

    state_path, cands_path = lab["root"] / "state.json", lab["root"] / "cands.json"
    st0, _ = _open_notebook(page, lab, notebook)
    page.get_by_text("Candidates: K macro arrangements side by side").click()
    field = page.locator(".fw-cand-count input")
    field.fill("3")
    field.press("Enter")
    page.get_by_role("button", name="Find candidates", exact=True).click()
    cands = _wait_state(cands_path, lambda c: len(c["labels"]) == 3, 300, "three candidates")
    # their pictures in the page: one figure per card, with the macros drawn
    page.wait_for_function(
        "() => Array.from(document.querySelectorAll('.fw-candidate'))"
        ".filter(c => c.querySelector('.bqplot path')).length === 3", timeout=60_000)
    # the run has ended (a click while it runs would be refused)
    page.wait_for_selector(".fw-message:has-text('candidate(s) done')", timeout=60_000)

    # click the second-best candidate's picture
    label = cands["labels"][1]
    want = cands["alts"][label]
    assert st0["positions"] != want["positions"]
    card = page.locator(".fw-candidate").nth(1)
    card.locator(".bqplot").first.click()
    st1 = _wait_state(state_path, lambda s: s["undo"][-1:] == ["restore"], 60, "the restore")
    assert st1["positions"] == want["positions"]
    assert st1["report"]["hpwl"] == pytest.approx(want["hpwl"], rel=1e-12)
    shown = fmt.value(want["hpwl"], unit=" µm")
    assert shown in st1["readout"]  # the readouts show the candidate's HPWL
    assert shown in cands["figures"][1]  # as the figures under its picture do
    c1 = _wait_state(cands_path, lambda c: c["current"] == label, 30, "the current mark")
    assert c1["current"] == label

    # the readouts in the page too (the HPWL cell of the table)
    page.wait_for_selector(f".fw-readouts:has-text('{shown}')", timeout=30_000)
    _dismiss_news(page)
    page.evaluate("() => document.querySelector('.fw-candidates')"
                  ".scrollIntoView({block: 'end'})")
    page.wait_for_timeout(1000)
    shot = artifacts / "browser_candidates.png"
    page.screenshot(path=str(shot), full_page=False)
    assert shot.stat().st_size > 10_000
