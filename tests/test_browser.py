"""The widget in a real JupyterLab, driven by Debian's headless Chromium through Playwright.

A macro's drag handle is dragged with the mouse; the notebook's Session observer writes the
session state to ``state.json`` on every change, and the test checks from the kernel side that
the macro moved by the dragged distance (pixels converted to µm from the scales and the screen
positions of the handles) and that the HPWL readout changed.  The layout is measured in the
page (at 1,600 x 1,000 the canvas takes at least 60 % of the widget's width and the widget fits
the window; at 1,000 px wide a drag still lands), and the macro labels' text boxes, as Chromium
lays them out, never overlap (the demo, and ariane136 zoomed on its densest macros).
"""

from __future__ import annotations

import json
import os
import shutil
import socket
import subprocess
import sys
import time
import urllib.request
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
CHROMIUM = Path("/usr/bin/chromium")
NOTEBOOK = ROOT / "tests" / "browser" / "drag_widget.ipynb"
REAL_NOTEBOOK = ROOT / "tests" / "browser" / "real_widget.ipynb"
REAL = ROOT.parent / "shared" / "realdata" / "ariane136"

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not CHROMIUM.exists(), reason="Debian's /usr/bin/chromium is missing"),
]


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.fixture
def lab(tmp_path):
    """A JupyterLab on 127.0.0.1 with every Jupyter/IPython directory inside ``tmp_path``."""
    root = tmp_path / "root"
    root.mkdir()
    shutil.copy(NOTEBOOK, root / NOTEBOOK.name)
    shutil.copy(REAL_NOTEBOOK, root / REAL_NOTEBOOK.name)
    shutil.copy(ROOT / "demo_data" / "heron_dsp.json", root / "heron_dsp.json")
    env = dict(os.environ)
    for var, sub in (("JUPYTER_CONFIG_DIR", "config"), ("JUPYTER_DATA_DIR", "data"),
                     ("JUPYTER_RUNTIME_DIR", "runtime"), ("IPYTHONDIR", "ipython")):
        (tmp_path / sub).mkdir()
        env[var] = str(tmp_path / sub)
    env.pop("JUPYTER_PATH", None)
    env.pop("JUPYTER_PREFER_ENV_PATH", None)
    env["PYTHONUNBUFFERED"] = "1"
    port = _free_port()
    token = os.urandom(16).hex()
    log = open(tmp_path / "lab.log", "w")  # noqa: SIM115 - closed in the teardown
    proc = subprocess.Popen(
        [sys.executable, "-m", "jupyterlab", "--no-browser", "--allow-root",
         "--ServerApp.ip=127.0.0.1",
         f"--ServerApp.port={port}", "--ServerApp.port_retries=0",
         f"--IdentityProvider.token={token}", f"--ServerApp.root_dir={root}",
         "--LabApp.news_url=", "--LabApp.check_for_updates_class="
         "jupyterlab.NeverCheckForUpdate", "--LabApp.extension_manager=readonly"],
        cwd=root, env=env, stdout=log, stderr=subprocess.STDOUT, start_new_session=True)
    base = f"http://127.0.0.1:{port}"
    try:
        deadline = time.monotonic() + 60
        while True:
            if proc.poll() is not None:
                raise RuntimeError("JupyterLab exited: "
                                   + (tmp_path / "lab.log").read_text()[-2000:])
            try:
                with urllib.request.urlopen(f"{base}/api/status?token={token}", timeout=2) as r:
                    if r.status == 200:
                        break
            except OSError:
                pass
            if time.monotonic() > deadline:
                raise RuntimeError("JupyterLab did not answer within 60 s")
            time.sleep(0.3)
        yield {"base": base, "token": token, "root": root, "log": tmp_path / "lab.log"}
    finally:
        proc.terminate()
        try:
            proc.wait(15)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait(5)
        log.close()


@pytest.fixture
def browser():
    sync_api = pytest.importorskip("playwright.sync_api")
    with sync_api.sync_playwright() as p:
        b = p.chromium.launch(
            executable_path=str(CHROMIUM), headless=True,
            args=["--no-sandbox", "--disable-gpu", "--disable-background-networking",
                  "--disable-component-update", "--disable-sync", "--no-first-run",
                  "--disable-quic"])
        try:
            yield b
        finally:
            b.close()


def _dismiss_news(page) -> None:
    """Answer JupyterLab's news question (a toast that would sit over the screenshot)."""
    try:
        page.get_by_role("button", name="No", exact=True).click(timeout=2_000)
    except Exception:  # noqa: BLE001 - not asked (yet)
        pass


def _read_state(path: Path) -> dict | None:
    try:
        return json.loads(path.read_text())
    except (OSError, ValueError):
        return None


def _wait_state(path: Path, pred, timeout: float, what: str) -> dict:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        st = _read_state(path)
        if st is not None and pred(st):
            return st
        time.sleep(0.2)
    raise AssertionError(f"timed out waiting for {what}; last state: {_read_state(path)}")


_HANDLES_JS = """
([n, scroll]) => {
  // the drag handles: the last group of SVG .dot elements with one dot per macro
  const groups = new Map();
  for (const d of document.querySelectorAll('.dot')) {
    const g = d.parentNode.parentNode;  // each dot sits in its own g.object_grp
    if (!groups.has(g)) groups.set(g, []);
    groups.get(g).push(d);
  }
  const full = Array.from(groups.values()).filter(v => v.length === n);
  if (full.length === 0) return null;
  const dots = full[full.length - 1];
  if (scroll) dots[0].ownerSVGElement.scrollIntoView({block: "center"});
  return dots.map(d => {
      const r = d.getBoundingClientRect();
      return [r.x + r.width / 2, r.y + r.height / 2];
  });
}
"""


def _on_new_page(browser, check, lab, artifacts, failure_png: str,
                 width: int = 1600, height: int = 1000) -> None:
    """Run ``check(page, lab, artifacts)`` on a fresh page; a screenshot when it fails."""
    page = browser.new_page(viewport={"width": width, "height": height})
    try:
        check(page, lab, artifacts)
    except BaseException:
        page.screenshot(path=str(artifacts / failure_png))
        raise
    finally:
        page.close()


def test_drag_moves_macro_in_real_browser(lab, browser, artifacts):
    _on_new_page(browser, _drag_check, lab, artifacts, "browser_failure.png")


def _open_notebook(page, lab, notebook: Path = NOTEBOOK) -> tuple[dict, list]:
    """Open the notebook, run it, and return the first state and the handles' screen points."""
    state_path = lab["root"] / "state.json"
    page.set_default_timeout(60_000)
    page.goto(f"{lab['base']}/lab/tree/{notebook.name}?token={lab['token']}")
    page.wait_for_selector(".jp-Notebook .jp-Cell", timeout=60_000)
    # JupyterLab may ask which kernel to start: take the one the notebook names
    try:
        page.wait_for_selector(".jp-Dialog button.jp-mod-accept", timeout=5_000).click()
    except Exception:  # noqa: BLE001 - no dialog: the kernel started by itself
        pass
    page.wait_for_selector(".jp-Notebook-ExecutionIndicator[data-status='idle']",
                           timeout=60_000)
    _dismiss_news(page)
    page.click("li.lm-MenuBar-item:has-text('Run')")
    page.click("li.lm-Menu-item:has-text('Run All Cells')")
    st0 = _wait_state(state_path, lambda s: "ready" in s["changes"], 120, "the notebook")
    n = len(st0["macros"])
    page.wait_for_selector(".dot", timeout=30_000)
    deadline = time.monotonic() + 30
    pts = None
    while time.monotonic() < deadline:
        pts = page.evaluate(_HANDLES_JS, [n, False])
        if pts and len(pts) == n:
            break
        time.sleep(0.3)
    if not pts or len(pts) != n:
        info = page.evaluate("""() => Array.from(document.querySelectorAll('.dot')).slice(0, 3)
            .map(d => [d.tagName, d.getAttribute('class'), d.parentNode.tagName,
                       d.parentNode.getAttribute('class'),
                       d.parentNode.parentNode.getAttribute('class'),
                       document.querySelectorAll('.dot').length])""")
        raise AssertionError(f"the drag handles were not drawn: {info}")
    page.evaluate(_HANDLES_JS, [n, True])  # bring the canvas into view
    page.wait_for_timeout(700)  # let the layout settle
    return st0, page.evaluate(_HANDLES_JS, [n, False])


def _drag_check(page, lab, artifacts):
    state_path = lab["root"] / "state.json"
    st0, pts = _open_notebook(page, lab)

    # screen pixels per µm from two far-apart handles and their data centres (kernel side)
    import numpy as np

    px = np.array(pts, dtype=float)
    c = np.array(st0["centres"], dtype=float)
    i, j = int(np.argmin(c[:, 0] + c[:, 1])), int(np.argmax(c[:, 0] + c[:, 1]))
    sx = (px[j, 0] - px[i, 0]) / (c[j, 0] - c[i, 0])
    sy = (px[j, 1] - px[i, 1]) / (c[j, 1] - c[i, 1])
    assert sx > 0 and sy < 0, (sx, sy)  # screen y grows downwards
    # µm are square on the screen
    assert abs(abs(sx) - abs(sy)) / abs(sx) < 0.02, (sx, sy)

    # a handle with no other handle near it, dragged towards the middle of the core so
    # that the move is not clamped at the core edge
    core = np.array(st0["core"], dtype=float)
    mid = (core[:2] + core[2:]) / 2
    ll = np.array([st0["positions"][m] for m in st0["macros"]], dtype=float)
    half = c - ll
    dist = np.hypot(px[:, None, 0] - px[None, :, 0], px[:, None, 1] - px[None, :, 1])
    np.fill_diagonal(dist, np.inf)
    sign = np.where(c < mid, 1.0, -1.0)
    step = np.array([60.0, 45.0])  # pixels
    dest = c + sign * step / np.array([abs(sx), abs(sy)])
    fits = ((dest - half >= core[:2] + 5) & (dest + half <= core[2:] - 5)).all(axis=1)
    score = np.where(fits, dist.min(axis=1), -np.inf)
    k = int(np.argmax(score))
    assert np.isfinite(score[k])
    name = st0["macros"][k]
    dx_px, dy_px = sign[k, 0] * step[0], -sign[k, 1] * step[1]  # screen y points down
    x0, y0 = px[k]
    page.mouse.move(x0, y0)
    page.mouse.down()
    for t in np.linspace(0, 1, 12)[1:]:
        page.mouse.move(x0 + t * dx_px, y0 + t * dy_px)
        page.wait_for_timeout(30)
    page.mouse.up()

    moved = _wait_state(state_path, lambda s: s["positions"][name] != st0["positions"][name],
                        60, f"{name} to move")
    # the whole drop (move, pin, refine) lands as one step; wait until it has
    st1 = _wait_state(state_path, lambda s: len(s["changes"]) > len(st0["changes"]), 60,
                      "the change event")
    st1 = _read_state(state_path) or moved
    x_before, y_before = st0["positions"][name]
    x_after, y_after = st1["positions"][name]
    want_dx, want_dy = dx_px / sx, dy_px / sy
    pitch = st1["pitch"]
    tol_x = pitch[0] + 1.0 / abs(sx)
    tol_y = pitch[1] + 1.0 / abs(sy)
    assert abs((x_after - x_before) - want_dx) <= tol_x, (x_after - x_before, want_dx, tol_x)
    assert abs((y_after - y_before) - want_dy) <= tol_y, (y_after - y_before, want_dy, tol_y)
    assert st1["status"][name] == "pinned"
    assert st1["undo"][-1] == f"drag {name}"  # move, pin and refine as one undoable step
    assert "Refine skipped" not in st1["message"], st1["message"]
    assert st1["readout"] != st0["readout"]
    assert st1["report"]["hpwl"] != st0["report"]["hpwl"]
    _dismiss_news(page)
    page.wait_for_timeout(800)
    shot = artifacts / "browser_drag.png"
    page.screenshot(path=str(shot), full_page=False)
    assert shot.stat().st_size > 10_000


def test_align_and_typed_position_in_real_browser(lab, browser, artifacts):
    _on_new_page(browser, _arrange_check, lab, artifacts, "browser_arrange_failure.png")


def test_draw_blockage_in_real_browser(lab, browser, artifacts):
    _on_new_page(browser, _blockage_check, lab, artifacts, "browser_blockage_failure.png")


def _blockage_check(page, lab, artifacts):
    """Type a maximum density, pick "Draw blockage", drag a rectangle on the canvas: the
    Session gets the partial blockage, its corners where the mouse went (screen scale from two
    handles, as in the drag test)."""
    import numpy as np

    state_path = lab["root"] / "state.json"
    st0, _ = _open_notebook(page, lab)
    n = len(st0["macros"])
    page.get_by_role("tab", name="Constraints").click()  # the blockage fields' tab
    field = page.locator(".fw-new-density input")
    field.fill("0.35")
    field.press("Enter")
    page.get_by_role("button", name="Draw blockage", exact=True).click()
    # typing scrolled the panel: bring the canvas back and measure the handles again
    page.evaluate(_HANDLES_JS, [n, True])
    page.wait_for_timeout(500)
    px = np.array(page.evaluate(_HANDLES_JS, [n, False]), dtype=float)
    c = np.array(st0["centres"], dtype=float)
    i, j = int(np.argmin(c[:, 0] + c[:, 1])), int(np.argmax(c[:, 0] + c[:, 1]))
    sx = (px[j, 0] - px[i, 0]) / (c[j, 0] - c[i, 0])
    sy = (px[j, 1] - px[i, 1]) / (c[j, 1] - c[i, 1])
    core = np.array(st0["core"], dtype=float)
    # from 30 % to 45 % of the core (data), as screen points
    lo_d = core[:2] + 0.30 * (core[2:] - core[:2])
    hi_d = core[:2] + 0.45 * (core[2:] - core[:2])
    to_px = lambda p: (px[i, 0] + (p[0] - c[i, 0]) * sx, px[i, 1] + (p[1] - c[i, 1]) * sy)  # noqa: E731
    a, b = to_px(lo_d), to_px(hi_d)
    page.mouse.move(*a)
    page.mouse.down()
    for t in np.linspace(0, 1, 10)[1:]:
        page.mouse.move(a[0] + t * (b[0] - a[0]), a[1] + t * (b[1] - a[1]))
        page.wait_for_timeout(30)
    page.mouse.up()
    n0 = len(st0["blockages"])
    st1 = _wait_state(state_path, lambda s: len(s["blockages"]) > n0, 60, "the new blockage")
    assert st1["undo"][-1] == "add_blockage"
    got = np.array(st1["blockages"][-1])
    tol = 3.0 / abs(sx)  # a few pixels
    assert np.allclose(got, [lo_d[0], lo_d[1], hi_d[0], hi_d[1]], atol=tol), (got, lo_d, hi_d)
    assert st1["max_density"][-1] == 0.35
    page.wait_for_timeout(500)
    page.screenshot(path=str(artifacts / "browser_blockage.png"), full_page=False)


def _arrange_check(page, lab, artifacts):
    """Box-select two macros, press Align (left edges), then type one macro's x and Set."""
    import numpy as np

    state_path = lab["root"] / "state.json"
    st0, pts = _open_notebook(page, lab)
    names = st0["macros"]
    px = np.array(pts, dtype=float)
    # two handles whose screen box (grown by 12 px) holds no third handle, neither pinned, not
    # aligned already
    best = None
    for a in range(len(px)):
        for b in range(a + 1, len(px)):
            if "pinned" in (st0["status"][names[a]], st0["status"][names[b]]):
                continue
            if st0["positions"][names[a]][0] == st0["positions"][names[b]][0]:
                continue  # aligned already: Align would change nothing
            lo = np.minimum(px[a], px[b]) - 12
            hi = np.maximum(px[a], px[b]) + 12
            inside = np.all((px >= lo) & (px <= hi), axis=1).sum()
            d = float(np.hypot(*(px[a] - px[b])))
            if inside == 2 and (best is None or d < best[0]):
                best = (d, a, b, lo, hi)
    assert best is not None
    _, a, b, lo, hi = best
    page.get_by_role("button", name="Box select", exact=True).click()
    page.wait_for_timeout(300)
    page.mouse.move(lo[0], lo[1])
    page.mouse.down()
    for t in np.linspace(0, 1, 8)[1:]:
        page.mouse.move(lo[0] + t * (hi[0] - lo[0]), lo[1] + t * (hi[1] - lo[1]))
        page.wait_for_timeout(30)
    page.mouse.up()
    page.wait_for_selector("text=2 macros selected", timeout=20_000)
    page.get_by_role("tab", name="Edit").click()  # the arrangements live in the Edit tab
    page.get_by_role("button", name="Align", exact=True).click()
    st1 = _wait_state(state_path, lambda s: s["undo"][-1:] == ["align"], 60, "the align")
    xa, xb = st1["positions"][names[a]][0], st1["positions"][names[b]][0]
    assert xa == xb == min(st0["positions"][names[a]][0], st0["positions"][names[b]][0])

    # a typed coordinate: select one macro by clicking its handle, type x, press Set
    page.get_by_role("button", name="Move macros", exact=True).click()
    page.wait_for_timeout(500)
    pts = page.evaluate(_HANDLES_JS, [len(names), False])
    page.mouse.click(*pts[a])
    # the details panel names the one selected macro (the handles of the pair may touch)
    details = page.locator(".widget-html-content:has-text('lower-left (')")
    details.wait_for(timeout=20_000)
    picked = details.inner_text().split()[0]
    assert picked in (names[a], names[b]), details.inner_text()
    field = page.locator(".fw-edit-x input")
    field.fill("812.4")
    field.press("Enter")
    page.wait_for_timeout(300)
    page.get_by_role("button", name="Set", exact=True).click()
    st2 = _wait_state(state_path, lambda s: s["undo"][-1:] == [f"edit {picked}"], 60,
                      "the typed position")
    origin, pitch = 20.0, st2["pitch"][0]  # the demo's grid: origin 20 µm
    assert st2["positions"][picked][0] == origin + round((812.4 - origin) / pitch) * pitch
    assert st2["positions"][picked][1] == st1["positions"][picked][1]
    page.wait_for_timeout(500)
    page.screenshot(path=str(artifacts / "browser_arrange.png"), full_page=False)


_LAYOUT_JS = """
() => {
  const box = sel => { const e = document.querySelector(sel);
                       return e ? e.getBoundingClientRect().toJSON() : null; };
  const w = document.querySelector('.fw-widget');
  w.scrollIntoView({block: 'start'});
  const outer = w.closest('.jp-WindowedPanel-outer') || w.closest('.jp-Notebook');
  return {widget: box('.fw-widget'), canvas: box('.fw-canvas'), side: box('.fw-side'),
          toolbar: box('.fw-toolbar'), panel: outer.getBoundingClientRect().toJSON(),
          page: [document.scrollingElement.scrollHeight, window.innerHeight,
                 document.scrollingElement.scrollWidth, window.innerWidth]};
}
"""


def _layout(page) -> dict:
    page.evaluate(_LAYOUT_JS)
    page.wait_for_timeout(500)  # after scrolling: measure where it came to rest
    return page.evaluate(_LAYOUT_JS)


_LABELS_JS = """
(lines) => {
  // the canvas's SVG texts that are label lines, as Chromium lays them out
  const want = new Set(lines);
  const out = [];
  for (const t of document.querySelectorAll('.fw-canvas svg text')) {
    if (!want.has(t.textContent) || t.getAttribute('display') === 'none') continue;
    const r = t.getBoundingClientRect();
    if (r.width > 0) out.push([t.textContent, r.left, r.top, r.right, r.bottom]);
  }
  return out;
}
"""


def _label_boxes(page, lab) -> list:
    """Hover the canvas (the widget learns its size on screen and fits the labels again), then
    the drawn label lines' boxes on screen."""
    c = page.locator(".fw-canvas").bounding_box()
    page.mouse.move(c["x"] + 5, c["y"] + 5)
    page.mouse.move(c["x"] + c["width"] / 2, c["y"] + 10)
    page.wait_for_timeout(1500)
    drawn = _read_state(lab["root"] / "labels.json") or {"lines": []}
    return drawn, page.evaluate(_LABELS_JS, drawn["lines"])


def _assert_apart(boxes: list) -> None:
    """No two label lines overlap by more than half a pixel (anti-aliasing) either way."""
    for a in range(len(boxes)):
        for b in range(a + 1, len(boxes)):
            ta, *ra = boxes[a]
            tb, *rb = boxes[b]
            ox = min(ra[2], rb[2]) - max(ra[0], rb[0])
            oy = min(ra[3], rb[3]) - max(ra[1], rb[1])
            assert ox <= 0.5 or oy <= 0.5, (ta, ra, tb, rb)


def test_layout_and_labels_at_1600_by_1000(lab, browser, artifacts):
    _on_new_page(browser, _layout_check, lab, artifacts, "browser_layout_failure.png")


def _layout_check(page, lab, artifacts):
    _open_notebook(page, lab)
    m = _layout(page)
    w, c = m["widget"], m["canvas"]
    print(f"layout at 1600 x 1000: widget {w['width']:.0f} x {w['height']:.0f} px, canvas "
          f"{c['width']:.0f} px wide ({c['width'] / w['width']:.0%}), notebook panel "
          f"{m['panel']['height']:.0f} px high")
    assert c["width"] >= 0.6 * w["width"], m
    # the widget fits the notebook's visible height and the window; the page itself never
    # scrolls (JupyterLab scrolls the notebook panel, not the page)
    assert w["height"] <= m["panel"]["height"] + 1, m
    assert w["top"] >= m["panel"]["top"] - 1 and w["bottom"] <= m["page"][1] + 1, m
    assert m["page"][0] <= m["page"][1] and m["page"][2] <= m["page"][3], m
    # the side column sits beside the canvas, no lower than it
    assert m["side"]["left"] >= c["right"] - 1 and m["side"]["bottom"] <= c["bottom"] + 1, m
    lines, boxes = _label_boxes(page, lab)
    assert len(boxes) >= 1, (lines, boxes)
    _assert_apart(boxes)
    page.screenshot(path=str(artifacts / "browser_1600x1000.png"), full_page=False)
    # zoomed on one memory (found by name): its name and its neighbours' fit
    page.locator(".fw-find input").fill("sram_sp4k_3")
    page.get_by_role("button", name="Find", exact=True).click()
    page.wait_for_timeout(800)
    zoomed, boxes = _label_boxes(page, lab)
    assert zoomed["px_per_um"] > 1.5 * lines["px_per_um"] and len(boxes) >= 3, (zoomed, boxes)
    _assert_apart(boxes)
    page.screenshot(path=str(artifacts / "browser_1600x1000_zoomed.png"), full_page=False)
    # the arrow key over the canvas (ipyevents) nudges the found, selected macro one grid step
    state_path = lab["root"] / "state.json"
    st0 = _read_state(state_path)
    page.keyboard.press("ArrowRight")
    st1 = _wait_state(state_path, lambda s: s["undo"][-1:] == ["shift"], 30, "the nudge")
    x0, x1 = st0["positions"]["sram_sp4k_3"][0], st1["positions"]["sram_sp4k_3"][0]
    assert abs(x1 - x0 - st1["pitch"][0]) < 1e-9, (x0, x1)


def test_drag_lands_at_1000_px_wide(lab, browser, artifacts):
    def check(page, lab, artifacts):
        _drag_check(page, lab, artifacts)
        m = _layout(page)
        assert m["page"][2] <= m["page"][3], m  # nothing wider than the window
        lines, boxes = _label_boxes(page, lab)
        _assert_apart(boxes)
        page.screenshot(path=str(artifacts / "browser_1000x1000.png"), full_page=False)

    _on_new_page(browser, check, lab, artifacts, "browser_1000_failure.png", width=1000)


@pytest.mark.slow
@pytest.mark.skipif(not REAL.is_dir(), reason="../shared/realdata/ariane136 not present")
def test_labels_never_overlap_on_ariane136(lab, browser, artifacts):
    from conftest import ariane136_files

    path, lefs = ariane136_files()
    (lab["root"] / "real.json").write_text(json.dumps(
        {"def": str(path), "lef": [str(p) for p in lefs]}))

    def check(page, lab, artifacts):
        _open_notebook(page, lab, REAL_NOTEBOOK)
        lines, boxes = _label_boxes(page, lab)
        assert len(boxes) >= 2, (lines, boxes)  # the view shows a few macros named
        _assert_apart(boxes)
        page.screenshot(path=str(artifacts / "browser_ariane136_labels.png"), full_page=False)

    _on_new_page(browser, check, lab, artifacts, "browser_ariane_failure.png")
