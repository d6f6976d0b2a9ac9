"""Refine in the background, and the report in two stages, as the widget's drop uses them.

The yardsticks are the synchronous paths themselves: a background refine must end bit for bit
where ``with s.batch(...): move; pin; refine()`` ends, with the same log and one undo step, and
the staged report must end equal to :func:`floorwidget.evaluate` of the same floorplan.
"""

from __future__ import annotations

import threading
from concurrent.futures import ThreadPoolExecutor

import numpy as np
import pytest

import floorwidget as fw
from floorwidget.design import PINNED
from floorwidget.metrics import QUICK_KEYS, quick_figures


@pytest.fixture(scope="module")
def placement(demo_design):
    return fw.place(demo_design, seed=0)


@pytest.fixture
def placed(demo_design, placement):
    """A session that starts from a placement (its local refines compare with it)."""
    return fw.Session(demo_design, placement)


def _drag(s: fw.Session, m: str, dx: float, dy: float) -> None:
    x, y = s.floorplan.position(m)
    with s.batch(f"drag {m}"):
        s.move(m, x + dx, y + dy)
        s.pin(m)


def _same(a, b) -> None:
    for k in ("x", "y", "orient", "status"):
        np.testing.assert_array_equal(getattr(a, k), getattr(b, k))


def test_quick_figures_equal_the_same_keys_of_evaluate(placed, demo_design):
    fp = placed.floorplan
    full = fw.evaluate(demo_design, fp, target_density=0.7)
    quick = quick_figures(demo_design, fp, target_density=0.7)
    assert set(quick) == set(QUICK_KEYS) and set(QUICK_KEYS) < set(full)
    assert quick == {k: full[k] for k in QUICK_KEYS}


def test_staged_report_ends_equal_to_evaluate(placed, demo_design):
    _drag(placed, demo_design.macros[0], 12.0, -8.0)
    now, complete = placed.report_now()
    assert not complete and set(now) == set(QUICK_KEYS)
    rep = placed.report_later().result(timeout=60)
    assert rep == fw.evaluate(demo_design, placed.floorplan,
                              target_density=placed.target_density)
    assert placed.report_now() == (rep, True)


def test_background_refine_is_the_synchronous_drop_in_one_undo_step(placed, demo_design,
                                                                    placement):
    m = demo_design.macros[1]
    sync = fw.Session(demo_design, placement)
    x, y = sync.floorplan.position(m)
    with sync.batch(f"drag {m}"):
        sync.move(m, x + 15.0, y + 10.0)
        sync.pin(m)
        sync.refine()
    before = placed.floorplan
    steps = len(placed.history)
    seen = []  # what an observer reads when the refine's event comes: the joined history
    placed.on_change(lambda ev: seen.append((ev.action, placed.history[-1:], len(placed.log))))
    _drag(placed, m, 15.0, 10.0)
    assert placed.refine_later().result(timeout=120) is True
    assert seen[-1] == ("refine", [f"drag {m}"], len(sync.log))
    _same(placed.floorplan, sync.floorplan)
    assert placed.log == sync.log  # a replay runs the drop and its refine as one batch
    assert len(placed.history) == steps + 1
    placed.undo()
    _same(placed.floorplan, before)
    placed.redo()
    _same(placed.floorplan, sync.floorplan)


def test_a_newer_edit_supersedes_a_queued_refine(placed, demo_design):
    gate = threading.Event()
    ex = ThreadPoolExecutor(1)
    try:
        ex.submit(gate.wait)  # the worker is busy: the refine waits in the queue
        m0, m1 = demo_design.macros[:2]
        _drag(placed, m0, 10.0, 0.0)
        fut = placed.refine_later(executor=ex)
        _drag(placed, m1, 0.0, 10.0)
        after = placed.floorplan
        gate.set()
        assert fut.result(timeout=60) is False
    finally:
        gate.set()
        ex.shutdown()
    assert placed.floorplan is after
    assert placed.history[-1] == f"drag {m1}"
    assert placed.log[-1]["label"] == f"drag {m1}"


def test_an_edit_during_the_run_stops_it_and_nothing_lands(placed, demo_design):
    m0, m1 = demo_design.macros[2:4]
    _drag(placed, m0, 10.0, 10.0)
    calls = []

    def progress(stage, fraction, info=None):
        calls.append(stage)
        if len(calls) == 1:  # the engineer drags again while the refine runs
            _drag(placed, m1, -10.0, 0.0)

    fut = placed.refine_later(progress=progress)
    assert fut.result(timeout=120) is False
    assert len(calls) == 1  # it stopped at the next report
    assert placed.history[-1] == f"drag {m1}" and placed.log[-1]["op"] == "batch"
    placed.undo()
    placed.undo()
    placed.refine()  # the next refine still sees both drags as changed: the window covers them
    assert fw.evaluate(demo_design, placed.floorplan)["macro_overlaps"] == 0


def test_refine_later_is_refused_inside_a_batch(placed):
    with pytest.raises(fw.DesignError, match="batch"), placed.batch("b"):
        placed.refine_later()


# --- the widget's drop: shown at once, refined in the background ---------------------------------


def test_widget_drop_does_not_wait_for_the_placer_and_a_newer_drop_supersedes(placed,
                                                                               demo_design):
    from floorwidget._threads import pool
    from floorwidget.metrics import hpwl
    from floorwidget.widget import FloorplanWidget

    w = FloorplanWidget(demo_design, session=placed)
    d, s = demo_design, placed
    gate = threading.Event()
    busy = pool("widget", 1).submit(gate.wait)  # the placer's worker is taken for now
    try:
        start = s.floorplan
        ka, kb = 4, 9
        a, b = int(w.macro_idx[ka]), int(w.macro_idx[kb])
        cx, cy = start.centres()
        first = w.drop(ka, cx[a] + 20.0, cy[a] + 10.0)
        dragged_a = s.floorplan
        # the moved macro and the quick figures are shown before any refine ran
        assert not first["refine"].done() and dragged_a.status[a] == PINNED
        assert np.asarray(w.canvas.marks["macros"].x)[ka, 0] == dragged_a.x[a]
        assert w.readouts.report["hpwl"] == hpwl(d, dragged_a)
        second = w.drop(kb, cx[b] - 20.0, cy[b] + 10.0)
    finally:
        gate.set()
    busy.result(timeout=10)
    assert second["refine"].result(timeout=120) is True
    assert first["refine"].result(timeout=120) is False  # superseded: it never landed
    assert w.wait(timeout=120)
    assert s.history[-2:] == [f"drag {d.names[a]}", f"drag {d.names[b]}"]
    assert w.readouts.complete
    assert w.readouts.report == fw.evaluate(d, s.floorplan, target_density=s.target_density)
    s.undo()  # drag b and its refine go together; drag a stays as it was dropped
    _same(s.floorplan, dragged_a)
    s.undo()
    _same(s.floorplan, start)


def test_canvas_reuses_the_cells_map_only_while_the_cells_stay(placed, demo_design):
    from floorwidget.design import MACRO, TERMINAL
    from floorwidget.metrics import rect_area_map
    from floorwidget.widget.canvas import Canvas

    d = demo_design
    c = Canvas(d, placed.floorplan)
    soft = (d.kind != MACRO) & (d.kind != TERMINAL)

    def fresh():
        return rect_area_map(c.grid, placed.floorplan.rects()[soft]) / c.grid.bin_area

    v0 = c.heat_values("cells")
    _drag(placed, d.macros[5], 10.0, 0.0)  # a macro moved, the cells did not
    c.update(placed.floorplan)
    assert c.heat_values("cells") is v0
    np.testing.assert_array_equal(v0, fresh())
    placed.refine()  # the cells near the macro move
    c.update(placed.floorplan)
    v1 = c.heat_values("cells")
    assert not np.array_equal(v1, v0)
    np.testing.assert_array_equal(v1, fresh())


def test_a_nudged_macro_opens_a_smaller_window_than_a_hand_move(demo_design, placement):
    from floorwidget.placer.flow import refine_window

    d = demo_design
    fp = placement
    i = d.block(d.macros[3])
    after = fp.copy()
    after.x[i] += 0.4 * d.grid_pitch[0]  # what snapping an off-grid macro does
    hand = refine_window(d, fp, after, np.array([i]))
    nudged = refine_window(d, fp, after, np.array([], dtype=np.intp), nudged=[i])
    assert 0 < nudged.sum() < hand.sum() and not (nudged & ~hand).any()
    r = after.rects(halo=True)[i]
    cx, cy = after.centres()
    on = (cx >= r[0]) & (cx <= r[2]) & (cy >= r[1]) & (cy <= r[3])
    assert nudged[on].all()  # whatever it now covers is re-placed


def test_a_refine_after_a_single_move_joins_it_and_replays(placed, demo_design):
    m = demo_design.macros[6]
    before = placed.floorplan
    x, y = before.position(m)
    placed.move(m, x + 8.0, y)  # one call, not a batch
    assert placed.refine_later().result(timeout=120) is True
    assert placed.history[-1] == "move" and placed.log[-1]["op"] == "batch"
    ns: dict = {}
    exec(placed.script(), ns)
    _same(ns["session"].floorplan, placed.floorplan)
    placed.undo()
    _same(placed.floorplan, before)


def test_a_refine_refused_before_it_runs_keeps_the_drop(placed, demo_design):
    from floorwidget.widget import FloorplanWidget

    w = FloorplanWidget(demo_design, session=placed)
    w.refine_options["target_density"] = 2.0  # outside (0, 1]: refused by the Session
    i = int(w.macro_idx[2])
    cx, cy = placed.floorplan.centres()
    out = w.drop(2, cx[i] + 20.0, cy[i])
    assert out["moved"] == [demo_design.names[i]] and out["refine"] is None
    assert out["message"].startswith("Refine skipped") and "density" in out["message"]
    assert placed.history[-1] == f"drag {demo_design.names[i]}"
