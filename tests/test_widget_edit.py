"""Headless tests of the widget's exact edits and arrange controls.

The controls are driven as a person would: select macros, set the fields, ``click()`` the
buttons (ipywidgets runs the same callbacks as in the browser).  The expected positions are
closed forms — equal edges, :func:`floorwidget.design.snap` of the typed value, one grid step
per nudge — and every action is one undo step.
"""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("bqplot")

from floorwidget.design import PINNED, snap  # noqa: E402
from floorwidget.widget import FloorplanWidget  # noqa: E402


@pytest.fixture
def w(demo_design):
    w = FloorplanWidget(demo_design, size=400, live=False)
    s = w.session
    for k, nm in enumerate(["sram_sp4k_0", "sram_sp4k_1", "sram_sp2k_0"]):
        s.move(nm, 300.0 + 400 * k, 400.0 + 250 * k)
    return w


def test_align_through_the_panel(w, demo_design):
    d, s = demo_design, w.session
    names = ["sram_sp4k_0", "sram_sp4k_1"]
    steps = len(s.history)
    w.select(names)
    w.edit.align_side.value = "top"
    w.buttons["Align"].click()
    r = s.floorplan.rects()[[d.block(n) for n in names]]
    assert r[0, 3] == r[1, 3]  # same height: the top edges are equal exactly
    assert len(s.history) == steps + 1 and s.history[-1] == "align"
    assert "Aligned 2 macros" in w.message.value
    assert s.script().rstrip().endswith(f"session.align({names!r}, 'top')")
    w.buttons["Undo"].click()
    assert len(s.history) == steps


def test_typed_coordinate_and_orientation(w, demo_design):
    d, s = demo_design, w.session
    nm = "sram_sp2k_0"
    i = d.block(nm)
    w.select([nm])
    assert not w.buttons["Set"].disabled
    assert w.edit.x.value == s.floorplan.x[i] and w.edit.orient.value == "N"
    w.edit.x.value, w.edit.y.value = 812.4, 633.3
    w.buttons["Set"].click()
    (ox, oy), (px, py) = d.grid_origin, d.grid_pitch
    assert s.floorplan.x[i] == snap(812.4, ox, px) and s.floorplan.y[i] == snap(633.3, oy, py)
    assert w.edit.x.value == s.floorplan.x[i]  # the fields show what was taken
    # a new orientation alone turns the macro about its centre (one step)
    cx, cy = (c[i] for c in s.floorplan.centres())
    w.edit.orient.value = "E"
    w.buttons["Set"].click()
    assert s.floorplan.orientation(nm) == "E"
    ncx, ncy = (c[i] for c in s.floorplan.centres())
    assert abs(ncx - cx) <= px / 2 + 1e-9 and abs(ncy - cy) <= py / 2 + 1e-9
    assert s.history[-2:] == [f"edit {nm}", f"edit {nm}"]
    # several macros selected: the fields are off
    w.select(["sram_sp4k_0", nm])
    assert w.buttons["Set"].disabled


def test_nudge_and_offset_move_the_selection(w, demo_design):
    d, s = demo_design, w.session
    names = ["sram_sp4k_0", "sram_sp4k_1"]
    idx = [d.block(n) for n in names]
    s.pin(names[0])  # nudging is a hand move: pinned macros move and stay pinned
    w.select(names)
    x0, y0 = s.floorplan.x[idx].copy(), s.floorplan.y[idx].copy()
    w.buttons["▶"].click()
    w.buttons["▲"].click()
    px, py = d.grid_pitch
    assert np.array_equal(s.floorplan.x[idx], x0 + px)
    assert np.allclose(s.floorplan.y[idx], y0 + py, rtol=0, atol=1e-9)
    assert s.floorplan.status[idx[0]] == PINNED
    w.edit.dx.value, w.edit.dy.value = -100.0, 0.0
    w.buttons["Move by"].click()
    assert np.array_equal(s.floorplan.x[idx], x0 + px - 100.0)
    assert s.history[-3:] == ["shift", "shift", "shift"]


def test_arrange_buttons_refuse_pinned_and_report_illegal(w, demo_design):
    d, s = demo_design, w.session
    names = ["sram_sp4k_0", "sram_sp4k_1", "sram_sp2k_0"]
    w.select(names)
    w.edit.rows.value, w.edit.cols.value = 1, 3
    w.edit.pitch_x.value, w.edit.pitch_y.value = 100.0, 0.0  # narrower than the macros
    w.buttons["Array"].click()
    x = s.floorplan.x[[d.block(n) for n in names]]
    assert np.array_equal(np.diff(x), [100.0, 100.0])
    assert not s.report["legal"] and "Not legal now" in w.message.value
    s.pin(names[1])
    before = s.floorplan
    for label in ("Mirror ↔", "Even gaps ↕", "To core edge", "Align"):
        w.buttons[label].click()
        assert "is pinned" in w.message.value
        assert s.floorplan is before
    w.select([])
    w.buttons["Align"].click()
    assert "Select one or more macros first" in w.message.value


def test_arrow_keys_nudge_by_grid_steps_and_ctrl_z_undoes(w, demo_design):
    # the key handler receives what ipyevents sends (a dict per DOM event); one grid step per
    # arrow, ten with Shift (closed form: pitch times steps), one undo step per key
    pytest.importorskip("ipyevents")
    d, s = demo_design, w.session
    assert w.shortcuts.available
    nm = "sram_sp4k_1"
    i = d.block(nm)
    w.select([nm])
    x0, y0 = float(s.floorplan.x[i]), float(s.floorplan.y[i])
    px, py = (float(v) for v in d.grid_pitch)
    steps = len(s.history)
    assert w.shortcuts.handle({"type": "keydown", "key": "ArrowRight"})
    assert w.shortcuts.handle({"type": "keydown", "key": "ArrowUp", "shiftKey": True})
    assert s.floorplan.x[i] == pytest.approx(x0 + px) and s.floorplan.y[i] == pytest.approx(
        y0 + 10 * py)
    assert len(s.history) == steps + 2
    assert w.shortcuts.handle({"type": "keydown", "key": "z", "ctrlKey": True})
    assert s.floorplan.y[i] == pytest.approx(y0) and len(s.history) == steps + 1
    assert w.shortcuts.handle({"type": "keydown", "key": "y", "ctrlKey": True})
    assert s.floorplan.y[i] == pytest.approx(y0 + 10 * py)
    assert w.shortcuts.handle({"type": "keydown", "key": "Escape"}) and w.selection == []
    # nothing selected: the arrow is refused in the message line, nothing changes
    assert w.shortcuts.handle({"type": "keydown", "key": "ArrowLeft"})
    assert "Select one or more macros" in w.message.value
    assert not w.shortcuts.handle({"type": "keydown", "key": "q"})


def test_panels_follow_the_session_without_being_asked(w, demo_design):
    # a change made on the Session directly (a script beside the widget) reaches every panel
    # through its own observer: readouts, details, edit fields, alternatives
    s = w.session
    nm = "sram_sp2k_0"
    w.select([nm])
    before = w.readouts.html.value
    s.move(nm, 1200.0, 900.0)
    i = demo_design.block(nm)
    assert w.readouts.html.value != before
    assert f"lower-left ({s.floorplan.x[i]:.2f}" in w.details.html.value
    assert w.edit.x.value == s.floorplan.x[i]
    s.snapshot("by script")
    assert "by script" in w.alternatives.table_html() and "by script" in w.alternatives.a.options


def test_runs_use_the_shared_pool(w):
    # a background run goes to the package's pool (thread "floorwidget-widget"), not a thread
    # of the widget's own
    import threading

    seen = []
    w.session.on_change(lambda ev: seen.append(threading.current_thread().name))
    assert w.refine(wait=False)
    assert w.wait(120) and not w.busy
    assert seen and seen[-1].startswith("floorwidget-widget")
