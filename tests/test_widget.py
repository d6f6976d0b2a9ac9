"""Headless tests of the floorplanning widget: marks to scale, the drop path, undo, live HPWL Δ.

The widget is driven through the same methods its bqplot callbacks call (``drop``,
``drag_preview``, ``select``); the browser test drives the real callbacks.  Outside references:
the LEF/DEF language reference's orientation definitions (from memory: FN mirrors about the y
axis, S is a half turn, W a quarter turn counter-clockwise) for the pin-1 notch; a from-scratch
:func:`floorwidget.metrics.hpwl` of the whole design for the live HPWL Δ; a plain Python walk
over the nets for the flyline bundles; :func:`floorwidget.design.snap` for the snap grid.
"""

from __future__ import annotations

import threading

import numpy as np
import pytest

pytest.importorskip("bqplot")

import floorwidget as fw  # noqa: E402
from floorwidget import metrics  # noqa: E402
from floorwidget.design import FIXED, MACRO, PINNED, snap  # noqa: E402
from floorwidget.widget import FloorplanWidget, thumbnail  # noqa: E402
from floorwidget.widget.canvas import Canvas  # noqa: E402


@pytest.fixture(scope="module")
def placed(demo_design):
    """A placed, legalised demo floorplan (computed once)."""
    s = fw.Session(demo_design)
    s.place(seed=0)
    s.legalize()
    return s.floorplan.copy()


@pytest.fixture
def widget(demo_design, placed):
    return FloorplanWidget(demo_design, placed)


def _bits(a):
    return np.ascontiguousarray(a, dtype=np.float64).view(np.int64)


def test_construction_marks_to_scale(widget, demo_design, placed):
    d, c = demo_design, widget.canvas
    mac = np.flatnonzero(d.kind == MACRO)
    counts = c.element_counts()
    for name in ("cells", "die", "core", "blockages", "halos", "macros", "notches",
                 "terminals", "handles"):
        assert counts[name] > 0, name
    assert counts["macros"] == counts["handles"] == counts["notches"] == len(mac)
    assert counts["terminals"] == int((d.kind == 3).sum())
    assert max(counts.values()) <= 5000
    # the rectangles are the floorplan's rectangles, corner by corner
    r = placed.rects()[mac]
    x = np.asarray(c.marks["macros"].x)
    y = np.asarray(c.marks["macros"].y)
    np.testing.assert_array_equal(x[:, [0, 1, 2, 3]], r[:, [0, 2, 2, 0]])
    np.testing.assert_array_equal(y[:, [0, 1, 2, 3]], r[:, [1, 1, 3, 3]])
    cx, cy = placed.centres()
    np.testing.assert_array_equal(c.marks["handles"].x, cx[mac])
    np.testing.assert_array_equal(c.marks["handles"].y, cy[mac])
    # µm are square: equal spans and a square plot area
    assert c.x_scale.max - c.x_scale.min == pytest.approx(c.y_scale.max - c.y_scale.min)
    assert c.figure.min_aspect_ratio == c.figure.max_aspect_ratio == 1
    assert c.figure.padding_x == c.figure.padding_y == 0
    # status is carried by the fill colour of each row
    st = c.status_style
    assert c.marks["macros"].fill_colors[0] in {s["fill"] for s in st.values()}
    assert "movable" in widget.view.legend.value and "pinned" in widget.view.legend.value
    # the browser reports the figure's size (ipyevents): the plot area takes all of it and
    # the spans follow, so µm stay square: pixels per µm equal along x and y
    w_px, h_px, m = 900.0, 600.0, 2 * c.margin
    x_mid = (c.x_scale.min + c.x_scale.max) / 2
    side = c.y_scale.max - c.y_scale.min
    c.set_screen_size(w_px, h_px)
    assert c.figure.min_aspect_ratio == c.figure.max_aspect_ratio == pytest.approx(
        (w_px - m) / (h_px - m))
    ppx = (w_px - m) / (c.x_scale.max - c.x_scale.min)
    ppy = (h_px - m) / (c.y_scale.max - c.y_scale.min)
    assert ppx == pytest.approx(ppy) == pytest.approx(c.px_per_um)
    assert c.y_scale.max - c.y_scale.min == pytest.approx(side)  # the shorter side kept
    assert (c.x_scale.min + c.x_scale.max) / 2 == pytest.approx(x_mid)
    c.zoom(0.5)
    c.reset_view()
    assert c.y_scale.max - c.y_scale.min == pytest.approx(side)


def test_status_styles_differ_in_outline_not_only_colour():
    from floorwidget.widget._style import status_style

    st = status_style()
    outlines = {(s["dash"], s["width"]) for s in st.values()}
    assert len(outlines) == len(st)  # readable in greyscale: every status has its own outline


def test_illegal_macros_are_drawn_differently(widget, demo_design):
    """Two pinned macros on top of each other break the no-overlap rule (and stay so)."""
    d, c = demo_design, widget.canvas
    a, b = d.macros[22], d.macros[23]
    xa, ya = widget.floorplan.position(a)
    widget.move(b, xa + 10.0, ya)
    widget.pin([a, b])
    st = c.status_style
    ia, ib = (int(np.searchsorted(widget.macro_idx, d.block(n))) for n in (a, b))
    fills = c.marks["macros"].fill_colors
    assert fills[ia] == fills[ib] == st["illegal"]["fill"]
    assert widget.report["macro_overlaps"] >= 1
    hatch = c.marks["hatch"]
    assert hatch.visible and np.asarray(hatch.x).reshape(-1, 4).shape[0] >= 2
    # the illegal outline mark holds exactly the illegal rows
    k = c.outline_keys.index((st["illegal"]["dash"], st["illegal"]["width"]))
    rows = np.asarray(c.marks[f"outline{k}"].x).reshape(-1, 5)
    n_illegal = sum(f == st["illegal"]["fill"] for f in fills)
    assert rows.shape[0] == n_illegal
    widget.undo()
    widget.undo()
    assert c.marks["macros"].fill_colors[ib] != st["illegal"]["fill"] or \
        widget.report["macro_overlaps"] > 0


def test_notch_follows_the_orientation(demo_design, placed):
    """Pin-1 corner (lower-left in N) under the LEF/DEF orientations (reference, from memory)."""
    w = FloorplanWidget(demo_design)  # the input floorplan: every macro in N
    d = demo_design
    name = d.macros[0]
    i = d.block(name)
    k = int(np.searchsorted(w.macro_idx, i))

    def corner():
        return (float(w.canvas.marks["notches"].x[k][0]), float(w.canvas.marks["notches"].y[k][0]))

    r = w.floorplan.rects()[i]
    assert corner() == pytest.approx((r[0], r[1]))          # N: lower-left
    w.flip(name)                                            # FN mirrors about the y axis
    r = w.floorplan.rects()[i]
    assert w.floorplan.orientation(name) == "FN"
    assert corner() == pytest.approx((r[2], r[1]))          # lower-right
    w.flip(name)
    w.rotate(name)
    w.rotate(name)                                          # S: half turn
    if w.floorplan.orientation(name) == "S":
        r = w.floorplan.rects()[i]
        assert corner() == pytest.approx((r[2], r[3]))      # upper-right


def test_drop_moves_snaps_pins_and_refines(widget, demo_design):
    d, s = demo_design, widget.session
    before = s.floorplan
    k = 3
    i = int(widget.macro_idx[k])
    name = d.names[i]
    cx, cy = before.centres()
    # a drag towards the core middle, so the move is not clamped at the core edge
    core = d.core
    dx = 123.4 if cx[i] < (core[0] + core[2]) / 2 else -123.4
    dy = 57.3 if cy[i] < (core[1] + core[3]) / 2 else -57.3  # not a half-step tie
    out = widget.drop(k, cx[i] + dx, cy[i] + dy, wait=True)
    fp = s.floorplan
    assert out["moved"] == [name] and out["refined"]
    (ox, oy), (px, py) = d.grid_origin, d.grid_pitch
    assert fp.x[i] == snap(before.x[i] + dx, ox, px)
    assert fp.y[i] == snap(before.y[i] + dy, oy, py)
    assert fp.status[i] == PINNED
    # refine ran: some soft clusters moved, and the canvas shows the new state
    soft = d.kind == 1
    assert (fp.x[soft] != before.x[soft]).any()
    mac = widget.macro_idx
    np.testing.assert_array_equal(np.asarray(widget.canvas.marks["macros"].x)[:, 0],
                                  fp.rects()[mac][:, 0])
    assert s.history[-1] == f"drag {name}"
    # one undo reverts move, pin and refine together, bit for bit
    widget.undo()
    after = s.floorplan
    assert after.identical(before)
    for a in ("x", "y"):
        np.testing.assert_array_equal(_bits(getattr(after, a)), _bits(getattr(before, a)))
    np.testing.assert_array_equal(np.asarray(widget.canvas.marks["macros"].x)[:, 0],
                                  before.rects()[mac][:, 0])


def test_pinned_macros_stay_bit_exact_through_refine(widget, demo_design):
    d, s = demo_design, widget.session
    pins = [d.macros[j] for j in (0, 5, 9, 20)]
    widget.pin(pins)
    idx = [d.block(n) for n in pins]
    ref_x = _bits(s.floorplan.x[idx]).copy()
    ref_y = _bits(s.floorplan.y[idx]).copy()
    k = 12  # a different macro is dropped, which refines around the pinned ones
    widget.toggles["Pin on drop"].value = False  # it stays movable: refine may legalise it
    i = int(widget.macro_idx[k])
    cx, cy = s.floorplan.centres()
    out = widget.drop(k, cx[i] + 40.0, cy[i] + 40.0, wait=True)
    assert out["refined"], out["message"]
    widget.refine()
    np.testing.assert_array_equal(_bits(s.floorplan.x[idx]), ref_x)
    np.testing.assert_array_equal(_bits(s.floorplan.y[idx]), ref_y)
    assert (s.floorplan.status[idx] == PINNED).all()


def test_live_hpwl_delta_matches_full_recompute(widget, demo_design):
    d, s = demo_design, widget.session
    fp = s.floorplan
    k = 7
    i = int(widget.macro_idx[k])
    cx, cy = fp.centres()
    widget.drag_start(k)
    for dx, dy in ((10.0, 0.0), (-250.5, 180.25), (333.0, -90.0)):
        delta = widget.drag_preview(k, cx[i] + dx, cy[i] + dy)
        moved = fp.copy()
        moved.x[i] += dx
        moved.y[i] += dy
        full = metrics.hpwl(d, moved) - metrics.hpwl(d, fp)  # from scratch, every net
        assert delta == pytest.approx(full, rel=1e-9, abs=1e-6)
        assert "while dragging" in widget.readouts.html.value
    assert s.floorplan is fp  # a drag in progress changes nothing in the session
    # the dragged rectangle follows the handle on the canvas
    assert np.asarray(widget.canvas.marks["macros"].x)[k, 0] == pytest.approx(fp.x[i] + 333.0)


def test_drop_without_movement_is_a_click(widget):
    s = widget.session
    fp = s.floorplan
    i = int(widget.macro_idx[2])
    cx, cy = fp.centres()
    widget.drop(2, cx[i], cy[i])
    assert s.floorplan is fp
    assert widget.selection == [widget.design.names[i]]


def test_flylines_bundle_per_neighbour(widget, demo_design):
    d = demo_design
    i = int(widget.macro_idx[0])
    widget.select([i])
    # reference: a plain walk over every net touching the macro
    ref: dict[int, int] = {}
    for n in range(d.num_nets):
        blocks = set(d.pin_block[d.net_start[n]:d.net_start[n + 1]].tolist())
        if i in blocks and len(d.pin_block[d.net_start[n]:d.net_start[n + 1]]) <= 64:
            for b in blocks - {i}:
                ref[b] = ref.get(b, 0) + 1
    from floorwidget.widget.geometry import flyline_bundles

    nb, cnt = flyline_bundles(d, widget.floorplan, [i])
    assert dict(zip(nb.tolist(), cnt.tolist())) == ref
    # drawn: one bundle per target (a macro, an I/O bus, a hierarchy group's logic), weighted
    # by the distinct nets reaching it; reference: the same walk, names cut by hand
    def target(b):
        nm = d.names[b]
        if d.kind[b] == MACRO:
            return nm
        if d.kind[b] == 3:
            return "I/O " + nm.split("[")[0]
        return "logic of " + (nm.rsplit("/", 1)[0].split("/")[0] if "/" in nm else "(top level)")

    nets: dict[str, set] = {}
    for n in range(d.num_nets):
        blocks = set(d.pin_block[d.net_start[n]:d.net_start[n + 1]].tolist())
        if i in blocks and d.net_start[n + 1] - d.net_start[n] <= 64:
            for b in blocks - {i}:
                nets.setdefault(target(b), set()).add(n)
    c = widget.canvas
    tg, tcnt, _, _ = c.bundle_data()
    assert {c.target_label(t): k for t, k in zip(tg.tolist(), tcnt.tolist())} \
        == {k: len(v) for k, v in nets.items()}
    fl = c.marks["flylines"]
    assert fl.visible and np.asarray(fl.x).reshape(-1, 5).shape[0] == len(nets)
    # a bundle of more nets is drawn wider (polygon width across the line)
    xs = np.asarray(fl.x).reshape(-1, 5)
    ys = np.asarray(fl.y).reshape(-1, 5)
    width = np.hypot(xs[:, 0] - xs[:, 3], ys[:, 0] - ys[:, 3])
    order = np.argsort(tcnt)
    assert width[order[-1]] > width[order[0]] or tcnt.min() == tcnt.max()
    assert widget.design.names[i] in widget.details.html.value


def test_box_selection_moves_together(widget, demo_design):
    d, s = demo_design, widget.session
    h = widget.canvas.marks["handles"]
    # two macros far enough from the core edge that a 60 µm move is never clamped
    r = s.floorplan.rects()[widget.macro_idx]
    inner = np.flatnonzero((r[:, 0] > d.core[0] + 60) & (r[:, 1] > d.core[1] + 60)
                           & (r[:, 2] < d.core[2] - 60) & (r[:, 3] < d.core[3] - 60))
    ka, kb = int(inner[0]), int(inner[1])
    h.selected = [ka, kb]  # what the BrushSelector does in the browser
    a, b = int(widget.macro_idx[ka]), int(widget.macro_idx[kb])
    assert set(widget.selection) == {d.names[a], d.names[b]}
    fp = s.floorplan
    cx, cy = fp.centres()
    widget.toggles["Live refine"].value = False
    dx, dy = 50.0, -30.0
    widget.drop(ka, cx[a] + dx, cy[a] + dy)
    new = s.floorplan
    (ox, oy), (px, py) = d.grid_origin, d.grid_pitch
    for j in (a, b):
        assert new.x[j] == snap(fp.x[j] + dx, ox, px)
        assert new.y[j] == snap(fp.y[j] + dy, oy, py)
        assert new.status[j] == PINNED
    widget.undo()
    assert s.floorplan.identical(fp)
    widget.select([a, b])
    widget.buttons["Unpin"].click()
    widget.buttons["Pin"].click()
    assert (s.floorplan.status[[a, b]] == PINNED).all()


def test_second_run_while_busy_is_refused(widget):
    s = widget.session
    gate, started = threading.Event(), threading.Event()
    real_place = s.place
    calls = []

    def slow_place(**kw):
        calls.append(kw)
        started.set()
        gate.wait(10)
        real_place(**kw)

    s.place = slow_place
    try:
        assert widget.place(wait=False) is True
        assert started.wait(5)
        assert widget.busy
        assert widget.place(wait=False) is False          # refused, not queued
        assert "refused" in widget.message.value
        widget.buttons["Place all"].click()               # the button says the same
        assert "refused" in widget.message.value
        fp = s.floorplan
        i = int(widget.macro_idx[1])
        cx, cy = fp.centres()
        assert widget.drop(1, cx[i] + 80, cy[i])["message"]  # a drop is refused too
        assert s.floorplan is fp
        assert widget.runner.progress.layout.visibility == "visible"
    finally:
        gate.set()
        assert widget.wait(30)
        s.place = real_place
    assert len(calls) == 1
    assert not widget.busy and widget.runner.progress.layout.visibility == "hidden"
    assert s.history[-1] == "place"
    assert "Place done" in widget.message.value


def test_rows_and_labels_follow_the_zoom(widget, demo_design):
    c = widget.canvas
    assert not c.marks["rows"].visible
    n_labels = c.element_counts()["labels"]
    d = demo_design
    i = int(widget.macro_idx[0])
    cx, cy = widget.floorplan.centres()
    with c.figure.hold_sync():
        c.x_scale.min, c.x_scale.max = cx[i] - 60, cx[i] + 60
        c.y_scale.min, c.y_scale.max = cy[i] - 60, cy[i] + 60
    c._on_view()
    rows = c.marks["rows"]
    assert rows.visible
    ry = np.asarray(rows.y)[:, 0]
    assert 0 < len(ry) <= 300
    assert np.isin(ry, d.row_y).all()
    assert c.element_counts()["labels"] >= 1
    c.reset_view()
    assert not c.marks["rows"].visible
    assert c.element_counts()["labels"] == n_labels


def test_heat_layers_toggle(widget):
    c = widget.canvas
    widget.toggles["Congestion"].value = True
    assert c.marks["congestion"].visible and not c.marks["cells"].visible
    np.testing.assert_allclose(np.asarray(c.marks["congestion"].color).T,
                               metrics.congestion_map(widget.design, widget.floorplan, c.grid))
    widget.toggles["Density"].value = True
    assert c.marks["density"].visible and not c.marks["congestion"].visible
    widget.toggles["Density"].value = False
    assert c.marks["cells"].visible


def test_alternatives_table_and_thumbnails(widget, demo_design, placed):
    widget.keep("hand start")
    widget.toggles["Live refine"].value = False
    i = int(widget.macro_idx[0])
    cx, cy = widget.floorplan.centres()
    widget.drop(0, cx[i] + 100.0, cy[i])
    table = widget.alternatives.table_html()
    assert "hand start" in table and "current" in table
    assert f"{widget.session.alternative('hand start').report['hpwl']:,.0f}" in table
    widget.alternatives.a.value = "hand start"
    widget.alternatives.b.value = "current"
    thumbs = widget.alternatives.thumbs.children
    assert len(thumbs) == 2
    # the thumbnails are the canvas code at small size, without handles
    t = Canvas(demo_design, widget.session.alternative("hand start").floorplan, size=200,
               interactive=False)
    assert "handles" not in t.marks
    mac = widget.macro_idx
    np.testing.assert_array_equal(np.asarray(t.marks["macros"].x)[:, 0], placed.rects()[mac][:, 0])
    f = thumbnail(demo_design, widget.floorplan, 180)
    assert f.layout.width == "180px"
    assert "macro(s) moved" in widget.alternatives.diff.value


def test_proxies_match_the_session(widget, demo_design):
    s = widget.session
    name = demo_design.macros[2]
    pos = widget.move(name, 300.0, 400.0)
    assert s.floorplan.position(name) == pos
    widget.rotate(name)
    widget.undo()
    widget.redo()
    assert widget.floorplan is s.floorplan
    assert widget.report == s.report
    assert widget.floorplan.status[demo_design.block(name)] != FIXED


# --- hardening: argument checks with messages of ours, nothing changed on refusal -------------


@pytest.mark.parametrize("index", [-1, "len", 2.0, True, None])
def test_drop_refuses_an_index_that_names_no_handle(widget, index):
    before = widget.session.floorplan
    k = len(widget.macro_idx) if index == "len" else index
    with pytest.raises((IndexError, TypeError), match="drop: handle index"):
        widget.drop(k, 100.0, 100.0)
    assert widget.session.floorplan is before and widget.session.history == []


@pytest.mark.parametrize("xy", [(float("nan"), 5.0), (5.0, float("inf"))])
def test_refused_non_finite_drop_reports_nothing_moved(widget, xy):
    before = widget.session.floorplan
    out = widget.drop(0, *xy)
    assert out["moved"] == [] and "not finite" in out["message"]
    assert widget.session.floorplan.identical(before)


def test_pin_and_select_take_indices_and_refuse_junk(widget, demo_design):
    i = int(widget.macro_idx[2])
    widget.pin(i)  # a block index, like select()
    assert widget.session.floorplan.status[i] == PINNED
    widget.unpin([demo_design.names[i]])
    assert widget.session.floorplan.status[i] != PINNED
    for bad, err in ((float("nan"), TypeError), (10**9, IndexError), (-1, IndexError),
                     ([1, "no-such-block"], KeyError), (object(), TypeError)):
        with pytest.raises(err, match="no-such-block|select|pin"):
            widget.select(bad)
        with pytest.raises(err, match="no-such-block|select|pin"):
            widget.pin(bad)


def test_illegal_marking_follows_the_halo_rule():
    # the halo rule (common practice): halos may overlap; a footprint in another's halo may not
    from floorwidget.design import Design, Floorplan
    from floorwidget.metrics import illegal_blocks

    d = Design("pair", (0, 0, 100, 100), ["a", "b"], [MACRO, MACRO], [20, 20], [10, 10],
               [0, 2], [0, 1], [0.0, 0.0], [0.0, 0.0], halo=np.full((2, 4), 2.0),
               grid_pitch=(1.0, 1.0))
    clear = Floorplan(d, [10.0, 34.0], [10.0, 10.0])  # 4 µm apart: halo boxes overlap
    assert not illegal_blocks(d, clear).any()
    inside = Floorplan(d, [10.0, 31.0], [10.0, 10.0])  # 1 µm apart: b inside a's halo
    assert illegal_blocks(d, inside).tolist() == [True, True]
