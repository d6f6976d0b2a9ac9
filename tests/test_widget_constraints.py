"""Headless tests of the widget's blockage and halo controls.

Driven as a person would: the "Draw blockage" brush ending a drag, a blockage handle dropped,
the fields set and the buttons ``click()``ed (ipywidgets runs the same callbacks as in the
browser).  Every control only calls the Session, so the expected state is the Session's own
closed form (the rectangle drawn, moved by the handle's displacement) and one undo step each.
"""

from __future__ import annotations

import numpy as np
import pytest

pytest.importorskip("bqplot")

from floorwidget.widget import FloorplanWidget  # noqa: E402


@pytest.fixture
def w(demo_design):
    return FloorplanWidget(demo_design, size=400, live=False)


def _brush(w, x, y):
    b = w.toolbar.draw_brush
    b.brushing = True
    b.selected_x, b.selected_y = x, y
    b.brushing = False


def test_draw_mode_adds_a_blockage_through_the_session(w, demo_design):
    s = w.session
    w.toolbar.mode.value = "Draw blockage"
    assert w.canvas.figure.interaction is w.toolbar.draw_brush
    w.constraints.new_density.value = 0.25
    _brush(w, [700.0, 400.0], [900.0, 600.0])  # dragged right to left
    assert s.history[-1] == "add_blockage"
    assert s.design.blockages[-1].tolist() == [400.0, 600.0, 700.0, 900.0]
    assert s.design.blockage_max_density[-1] == 0.25
    assert s.script().rstrip().endswith(
        "session.add_blockage([400.0, 600.0, 700.0, 900.0], max_density=0.25)")
    c = w.canvas.element_counts()
    assert c["blockages"] == 1 and c["blockages_partial"] == 1 and c["blockage_handles"] == 2
    assert w.canvas.blockage_selected == 1 and w.constraints.pick.value == 1
    assert w.constraints.x.value == 400.0 and w.constraints.density.value == 0.25
    # a brush that ends with no rectangle (a click) adds nothing
    n = len(s.history)
    w.toolbar.draw_brush.brushing = True
    w.toolbar.draw_brush.selected_x = None
    w.toolbar.draw_brush.brushing = False
    assert len(s.history) == n


def test_drawing_is_clipped_to_the_die_and_bad_input_is_one_line(w, demo_design):
    s = w.session
    die = demo_design.die
    w.draw_blockage(die[2] - 50, die[3] - 40, die[2] + 500, die[3] + 500)
    assert s.design.blockages[-1].tolist() == [die[2] - 50, die[3] - 40, die[2], die[3]]
    n = len(s.history)
    w.constraints.new_density.value = 0.0
    w._ctx.ui(lambda: w.draw_blockage(-100, 20, -50, 80))  # wholly outside: no area left
    assert "blockage 2: rectangle" in w.message.value and "no area" in w.message.value
    assert len(s.history) == n


def test_blockage_handle_moves_edits_and_deletes(w, demo_design):
    s = w.session
    b0 = s.design.blockages[0].copy()
    cx, cy = (b0[0] + b0[2]) / 2, (b0[1] + b0[3]) / 2
    w.drop_blockage(0, cx + 100.0, cy - 50.0)
    assert s.history[-1] == "move_blockage"
    assert s.design.blockages[0].tolist() == (b0 + [100.0, -50.0, 100.0, -50.0]).tolist()
    n = len(s.history)
    w.drop_blockage(0, cx + 100.0, cy - 50.0)  # no displacement: a click selects only
    assert len(s.history) == n and w.canvas.blockage_selected == 0
    w.constraints.x.value, w.constraints.y.value = 50.0, 60.0
    w.constraints.density.value = 0.5
    w.buttons["Apply"].click()
    assert s.history[-1] == "edit blockage 0"  # move and density: one undo step
    assert s.design.blockages[0, :2].tolist() == [50.0, 60.0]
    assert s.design.blockage_max_density[0] == 0.5
    w.buttons["Delete blockage"].click()
    assert len(s.design.blockages) == 0 and w.canvas.element_counts()["blockage_handles"] == 0
    assert w.constraints.pick.value is None and w.buttons["Apply"].disabled
    w.undo()
    assert len(s.design.blockages) == 1 and w.canvas.element_counts()["blockages_partial"] == 1
    # a handle dropped outside the die is refused and put back
    w._ctx.ui(lambda: w.drop_blockage(0, 1e5, 1e5))
    assert "outside the die" in w.message.value
    assert w.canvas.marks["blockage_handles"].x[0] == pytest.approx(
        (s.design.blockages[0, 0] + s.design.blockages[0, 2]) / 2)


def test_halo_fields_set_the_halo_of_the_selection(w, demo_design):
    s = w.session
    names = list(demo_design.macros[:2])
    w.select(names)
    i = demo_design.block(names[0])
    assert [f.value for f in w.constraints.halo_fields] == demo_design.halo[i].tolist()
    for f, v in zip(w.constraints.halo_fields, [1.0, 2.0, 3.0, 4.0]):
        f.value = v
    w.buttons["Set halo"].click()
    assert s.history[-1] == "set_halo"
    idx = [demo_design.block(n) for n in names]
    assert np.array_equal(s.design.halo[idx], [[1.0, 2.0, 3.0, 4.0]] * 2)
    # the canvas draws the new halo boxes
    hx = np.asarray(w.canvas.marks["halos"].x)
    r = s.floorplan.rects(halo=True)[i]
    assert any(np.allclose(sorted(set(row)), sorted({r[0], r[2]})) for row in hx)
    w.constraints.halo_fields[0].value = -1.0
    w.buttons["Set halo"].click()
    assert "must not be negative" in w.message.value and s.history[-1] == "set_halo"
    assert s.design.halo[i, 0] == 1.0
    w.select([])
    assert w.buttons["Set halo"].disabled


def test_draw_region_and_assign_the_picked_group(w, demo_design):
    s = w.session
    w.toolbar.mode.value = "Draw region"
    w.regions.name.value = "dsp_logic"
    w.regions.kind.value = "guide"
    _brush(w, [200.0, 900.0], [300.0, 1100.0])
    assert s.history[-1] == "add_region"
    reg = s.design.regions
    assert reg.names == ("dsp_logic",) and reg.kind.tolist() == [1]
    assert reg.rects.tolist() == [[200.0, 300.0, 900.0, 1100.0]]
    assert w.regions.pick.value == "dsp_logic" and w.regions.name.value == ""
    c = w.canvas.element_counts()
    assert c["regions_guide"] == 1 and c["regions"] == 0 and c["region_labels"] == 1
    g = w.canvas.groups
    soft = (demo_design.kind == 1) | (demo_design.kind == 2)
    k = next(v for _, v in w.view.group_pick.options if soft[g.index == v].any())
    w.view.group_pick.value = k
    n = w.assign_picked_group()
    mem = s.design.regions.members(0)
    want = np.flatnonzero((g.index == k) & soft)
    assert n == len(want) > 0 and np.array_equal(mem, want)
    assert w.canvas.marks["region_labels"].text[0] == f" dsp_logic (guide, {n:,d})"
    w.buttons["Remove region"].click()
    assert len(s.design.regions) == 0 and w.regions.pick.value is None
    w.buttons["Assign group"].click()
    assert "Draw a region first" in w.message.value
    w.undo()
    assert w.regions.pick.value == "dsp_logic"
