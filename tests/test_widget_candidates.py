"""Headless tests of the candidates view: K candidates become K alternatives shown side by side,
best first; a click on one makes it current (one undo step) and undo returns.

Outside references: the half-perimeter wirelength of each net, recomputed here net by net from
the pin positions in plain Python (the definition of HPWL: half the perimeter of the bounding
box of a net's pins; Sherwani, "Algorithms for VLSI Physical Design Automation", Kluwer, 3rd
ed. 1999, from memory), for the figures under each picture and in the readouts; the ranking
rule of :func:`floorwidget.explore.candidates` (legal first, then HPWL × congestion p99),
recomputed from the reports; and the candidates' own rectangles for the pictures.
"""

from __future__ import annotations

import threading

import numpy as np
import pytest

pytest.importorskip("bqplot")

import floorwidget as fw  # noqa: E402
from floorwidget import explore  # noqa: E402
from floorwidget.explore import SerialExecutor  # noqa: E402
from floorwidget.kernels import fmt  # noqa: E402
from floorwidget.widget import FloorplanWidget  # noqa: E402
from floorwidget.widget.canvas import Canvas  # noqa: E402


def _hpwl_by_definition(design, fp) -> float:
    """Σ over nets of (max x − min x) + (max y − min y) of the pins, one net at a time."""
    px, py = fp.pin_positions()
    st = design.net_start
    total = 0.0
    for n in range(design.num_nets):
        xs, ys = px[st[n]:st[n + 1]], py[st[n]:st[n + 1]]
        if len(xs):
            total += (max(xs) - min(xs)) + (max(ys) - min(ys))
    return total


@pytest.fixture(scope="module")
def found(demo_design):
    """A widget that asked for three candidates (placements in this process)."""
    w = FloorplanWidget(demo_design)
    w.candidates.executor = SerialExecutor()
    w.candidates.options = {"cells": "global"}
    before = w.session.history
    assert w.find_candidates(3) is True
    return w, before


def test_k_candidates_become_alternatives_side_by_side_best_first(found, demo_design):
    w, before = found
    s, panel = w.session, w.candidates
    assert len(panel.labels) == 3
    assert set(panel.labels) == {a.label for a in s.alternatives}
    assert s.history == before  # adding alternatives changes nothing current
    reps = [s.alternative(lab).report for lab in panel.labels]
    key = [(not r["legal"], r["hpwl"] * r["congestion_p99"]) for r in reps]
    assert key == sorted(key)  # best first
    layouts = [s.alternative(lab).params["macro_layout"] for lab in panel.labels]
    assert sorted(layouts) == ["arrays", "free", "periphery"]  # diverse
    cards = panel.cards.children
    assert len(cards) == 3
    mac = w.macro_idx
    for lab, card in zip(panel.labels, cards):
        fp = s.alternative(lab).floorplan
        title, pic, figures, button = card.children
        # the figures beneath: HPWL by its definition, congestion p99 and logic regions
        hp = _hpwl_by_definition(demo_design, fp)
        assert s.alternative(lab).report["hpwl"] == pytest.approx(hp, rel=1e-9)
        assert fmt.value(hp, unit=" µm") in figures.value
        assert f"congestion p99 {fmt.value(s.alternative(lab).report['congestion_p99'])}" \
            in figures.value
        assert f"logic regions {s.alternative(lab).report['logic_regions']}" in figures.value
        # the picture is this candidate's floorplan, drawn by the canvas code
        ref = Canvas(demo_design, fp, size=200, interactive=False)
        rect = pic.marks[ref.figure.marks.index(ref.marks["macros"])]
        np.testing.assert_array_equal(np.asarray(rect.x)[:, 0], fp.rects()[mac][:, 0])
    assert "estimates" in panel.box.children[1].value
    assert "3 candidate(s), best first" in panel.status.value


def test_click_makes_a_candidate_current_and_undo_returns(found, demo_design):
    w, _ = found
    s, panel = w.session, w.candidates
    start = s.floorplan
    lab = panel.labels[1]
    # a click on the second picture, as ipyevents delivers it from the browser
    ev = panel._events[1]
    ev._handle_mouse_msg(None, {"type": "click"}, [])
    assert s.floorplan.identical(s.alternative(lab).floorplan)
    assert s.history[-1] == "restore"
    assert panel.current == lab
    borders = [c.layout.border for c in panel.cards.children]
    assert borders[1] != borders[0] == borders[2]  # the current one is outlined
    hp = _hpwl_by_definition(demo_design, s.floorplan)
    assert fmt.value(hp, unit=" µm") in w.readouts.html.value
    # a second click on the same picture adds no step
    n = len(s.history)
    ev._handle_mouse_msg(None, {"type": "click"}, [])
    assert len(s.history) == n and "already" in w.message.value
    # the engineer edits from there, then undoes back to the candidate and to the start
    name = demo_design.macros[0]
    x, y = s.floorplan.position(name)
    s.move(name, x + 40.0, y)
    assert panel.current is None
    s.undo()
    assert panel.current == lab
    s.undo()
    assert s.floorplan.identical(start)
    assert panel.current is None
    # the button under a picture does the same
    panel.cards.children[2].children[3].click()
    assert panel.current == panel.labels[2]
    s.undo()


def test_a_second_request_is_refused_while_one_runs(demo_design, monkeypatch):
    w = FloorplanWidget(demo_design)
    gate, started = threading.Event(), threading.Event()
    calls = []
    real = explore.candidates

    def slow(design, k, executor=None, base=None, **kw):
        calls.append(k)
        started.set()
        gate.wait(10)
        return real(design, k, SerialExecutor(), base, cells="global",
                    target_density=kw["target_density"])

    monkeypatch.setattr(explore, "candidates", slow)
    try:
        w.candidates.count.value = 1
        w.buttons["Find candidates"].click()  # in the background
        assert started.wait(5) and w.busy
        assert w.runner.progress.layout.visibility == "visible"
        assert w.find_candidates(2, wait=False) is False  # refused, not queued
        assert "refused" in w.message.value
        assert w.place(wait=False) is False  # other long runs too
    finally:
        gate.set()
        assert w.wait(60)
    assert calls == [1]
    assert len(w.candidates.labels) == 1 and len(w.session.alternatives) == 1
    assert "1 candidate(s) done" in w.message.value


@pytest.mark.parametrize("k", [0, 13, 2.5, True, "3"])
def test_a_bad_count_is_refused_before_anything_runs(demo_design, k):
    w = FloorplanWidget(demo_design)
    with pytest.raises(ValueError, match="K must be a whole number from 1 to 12"):
        w.find_candidates(k)
    assert not w.session.alternatives and not w.busy


def test_labels_of_a_second_request_do_not_clash(demo_design):
    s = fw.Session(demo_design)
    w = FloorplanWidget(demo_design, session=s)
    w.candidates.executor = SerialExecutor()
    w.candidates.options = {"cells": "global"}
    s.snapshot("cand1 kept by hand")
    assert w.find_candidates(1)
    assert w.candidates.labels[0].startswith("cand2 ")
