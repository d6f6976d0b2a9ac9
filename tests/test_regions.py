"""Cell regions: fences and guides for groups of standard cells.

After ``place``, every member of a fence lies inside one of its rectangles and no other cell
overlaps it — checked independently with shapely (Gillies et al., the GEOS geometry engine).
A guide's members end up on average closer to it than without it (the pull is soft).
The clamp into a region is checked against its closed form (the nearest point of a box).
Undo/redo, the replay script, session files and the DEF / JSON round trips are bit for bit.
"""

from __future__ import annotations

import json

import numpy as np
import pytest
import shapely

import floorwidget as fw
from floorwidget.design import CELL, CellRegions, DesignError
from floorwidget.formats.lefdef import read_def, write_def_pair
from floorwidget.formats.native_json import read_json, write_json
from floorwidget.placer.constraints import clamp_to_regions
from floorwidget.session import Session
from floorwidget.synth import rent_design


@pytest.fixture(scope="module")
def rent(tmp_path_factory):
    """1,500 cells and two macros (Rent's rule), saved so that scripts can load it, and a
    placement without regions."""
    p = tmp_path_factory.mktemp("rent") / "rent.json"
    d0 = rent_design(1500, seed=1, num_macros=2, macro_area=0.2)
    fw.save(d0, d0.initial, p)
    d = fw.load(p)
    s = Session(d)
    s.place()
    return d, s.floorplan


def _box(d, fx0, fy0, fx1, fy1):
    c = d.core
    w, h = c[2] - c[0], c[3] - c[1]
    return [c[0] + fx0 * w, c[1] + fy0 * h, c[0] + fx1 * w, c[1] + fy1 * h]


def _group(d):
    """The first 150 cells: one block of the netlist's bisection hierarchy (closely tied)."""
    return [d.names[i] for i in np.flatnonzero(d.kind == CELL)[:150]]


def _rects(fp, idx):
    r = fp.rects()[idx]
    return shapely.box(r[:, 0], r[:, 1], r[:, 2], r[:, 3])


def _state(s):
    fp, reg = s.floorplan, s.design.regions
    return (fp.x.copy(), fp.y.copy(), reg.member.copy(), reg.rects.copy(), reg.kind.copy(),
            reg.names)


def _same(a, b) -> bool:
    return all(np.array_equal(p, q) if isinstance(p, np.ndarray) else p == q
               for p, q in zip(a, b))


def test_clamp_is_the_nearest_point_of_the_nearest_rectangle():
    reg = CellRegions.build(3, [{"name": "a", "type": "fence",
                                 "rects": [[0, 0, 10, 10], [20, 0, 30, 10]]}])
    cx = np.array([5.0, 16.0, 40.0, 14.0])
    cy = np.array([5.0, 20.0, -5.0, 5.0])
    hw = np.array([1.0, 1.0, 2.0, 8.0])  # the last is wider than either rectangle
    hh = np.ones(4)
    x, y = clamp_to_regions(cx, cy, hw, hh, np.zeros(4, np.int64), reg)
    # inside: unchanged; else the nearest centre position of the nearer box (closed form)
    # (16, 20): 9 in the left box is 7 away, 21 in the right one 5 -> 21; the wide one is
    # centred on the nearer box (x 5, 9 away, not 25)
    assert x.tolist() == [5.0, 21.0, 28.0, 5.0]
    assert y.tolist() == [5.0, 9.0, 1.0, 5.0]


def test_fence_holds_its_cells_and_keeps_others_out(rent):
    d, fp0 = rent
    s = Session(d, fp0)
    rect = _box(d, 0.05, 0.6, 0.35, 0.95)
    names = _group(d)
    s.add_region("dsp_core", rect)
    assert s.assign_group("dsp_core", names) == len(names)
    s.place()
    assert s.report["legal"]
    fp = s.floorplan
    idx = np.array([d.block(n) for n in names])
    fence = shapely.box(*rect)
    assert shapely.contains(fence, _rects(fp, idx)).all()  # every member inside (shapely)
    others = np.setdiff1d(np.flatnonzero(d.kind == CELL), idx)
    assert shapely.area(shapely.intersection(_rects(fp, others), fence)).max() == 0.0
    # the members were mostly elsewhere before: the fence did move them
    assert not shapely.contains(fence, _rects(fp0, idx)).all()
    # refine keeps them in too
    s.refine()
    assert shapely.contains(fence, _rects(s.floorplan, idx)).all()


def test_fence_of_two_rectangles(rent):
    d, fp0 = rent
    s = Session(d, fp0)
    a, b = _box(d, 0.0, 0.0, 0.2, 0.25), _box(d, 0.7, 0.7, 0.98, 0.98)
    s.add_region("split", [a, b])
    s.assign_group("split", _group(d)[:80])
    s.place()
    idx = np.array([d.block(n) for n in _group(d)[:80]])
    both = shapely.union(shapely.box(*a), shapely.box(*b))
    assert shapely.contains(both, _rects(s.floorplan, idx)).all()


def test_guide_pulls_its_cells_closer_on_average(rent):
    d, fp0 = rent
    rect = _box(d, 0.05, 0.6, 0.35, 0.95)
    names = _group(d)
    idx = np.array([d.block(n) for n in names])
    s = Session(d, fp0)
    s.add_region("near_io", rect, kind="guide")
    s.assign_group("near_io", names)
    s.place()
    guide = shapely.box(*rect)

    def mean_distance(fp):
        cx, cy = fp.centres()
        return float(shapely.distance(guide, shapely.points(cx[idx], cy[idx])).mean())

    before, after = mean_distance(fp0), mean_distance(s.floorplan)
    assert after < 0.5 * before, (before, after)
    assert s.report["legal"]


def test_too_small_a_fence_is_refused_with_its_name(rent):
    d, fp0 = rent
    s = Session(d, fp0)
    s.add_region("tiny", _box(d, 0.5, 0.5, 0.52, 0.52))
    s.assign_group("tiny", _group(d))
    n = len(s.history)
    with pytest.raises(fw.placer.errors.PlacementError, match="region 'tiny'"):
        s.place()
    assert len(s.history) == n


def test_region_actions_undo_redo_replay_and_session_file(rent, tmp_path):
    d, fp0 = rent
    s = Session(d)
    states = [_state(s)]
    s.add_region("a", _box(d, 0.1, 0.1, 0.3, 0.3))
    states.append(_state(s))
    s.add_region("b", [_box(d, 0.5, 0.5, 0.6, 0.6), _box(d, 0.7, 0.5, 0.8, 0.6)], kind="guide")
    states.append(_state(s))
    s.assign_group("a", _group(d)[:10])
    states.append(_state(s))
    s.assign_group("b", prefix="", depth=0)  # the top level: every cell
    assert (s.design.regions.member[d.kind == CELL] == 1).all()
    assert (s.design.regions.member[d.kind != CELL] == -1).all()  # macros, pads not taken
    states.append(_state(s))
    s.assign_group(None, _group(d)[:5])
    states.append(_state(s))
    s.remove_region("a")
    assert s.design.regions.names == ("b",)
    assert (s.design.regions.member[d.kind == CELL][:5] == -1).all()
    states.append(_state(s))
    for want in reversed(states[:-1]):
        s.undo()
        assert _same(_state(s), want)
    assert s.design is d
    for want in states[1:]:
        s.redo()
        assert _same(_state(s), want)
    s.undo()
    ns: dict = {}
    exec(compile(s.script(), "<replay>", "exec"), ns)
    assert _same(_state(ns["session"]), _state(s))
    assert "session.assign_group('b', prefix='', depth=0)" in s.script()
    s.save(tmp_path / "r.json")
    t = Session.load(tmp_path / "r.json")
    assert _same(_state(t), _state(s))
    t.redo()
    s.redo()
    assert _same(_state(t), _state(s))


@pytest.mark.parametrize("call, match", [
    (lambda s, d: s.add_region("", _box(d, 0, 0, .1, .1)), "a non-empty text name"),
    (lambda s, d: s.add_region("a", _box(d, 0, 0, .1, .1)), "region 'a': there is already"),
    (lambda s, d: s.add_region("z", _box(d, 0, 0, .1, .1), kind="wall"), "kind must be"),
    (lambda s, d: s.add_region("z", [0, 0, 1e6, 1]), "region 'z': .*outside the die"),
    (lambda s, d: s.add_region("z", [_box(d, 0, 0, .2, .2), _box(d, .1, .1, .3, .3)]),
     "region 'z': its rectangles overlap"),
    (lambda s, d: s.assign_group("nope", ["c1"]), "region 'nope': no such cell region"),
    (lambda s, d: s.assign_group("a", [d.macros[0]]), "only standard cells and clusters"),
    (lambda s, d: s.assign_group("a", prefix="x/y", depth=1), "no hierarchy group 'x/y'"),
    (lambda s, d: s.assign_group("a"), "either names or a hierarchy prefix"),
    (lambda s, d: s.remove_region("nope"), "region 'nope': no such"),
])
def test_bad_region_edits_change_nothing(rent, call, match):
    d, _ = rent
    s = Session(d)
    s.add_region("a", _box(d, 0.1, 0.1, 0.3, 0.3))
    before, log = _state(s), s.log
    with pytest.raises(DesignError, match=match) as e:
        call(s, d)
    assert "\n" not in str(e.value)
    assert _same(_state(s), before) and s.log == log


def test_regions_round_trip_json_and_def(rent, tmp_path):
    d, _ = rent
    s = Session(d)
    s.add_region("f1", [_box(d, 0, 0, .2, .2), _box(d, .3, 0, .4, .1)])
    s.add_region("g1", _box(d, .5, .5, .7, .7), kind="guide")
    s.assign_group("f1", _group(d)[:20])
    s.assign_group("g1", _group(d)[20:30])
    dd = s.design
    write_json(dd, dd.initial, tmp_path / "a.json")
    j = read_json(tmp_path / "a.json")
    for a in ("rects", "kind", "member", "rect_start"):
        assert np.array_equal(getattr(j.regions, a), getattr(dd.regions, a)), a
    assert j.regions.names == dd.regions.names
    dp, _ = write_def_pair(dd, dd.initial, tmp_path / "a.def")
    text = dp.read_text()
    assert "+ TYPE FENCE ;" in text and "+ REGION g1 ;" in text
    r = read_def(dp)
    assert r.regions.names == dd.regions.names and r.regions.groups == ("f1", "g1")
    assert np.allclose(r.regions.rects, dd.regions.rects, atol=1.0 / dd.dbu)
    assert np.array_equal(r.regions.member[[r.block(n) for n in d.names]], dd.regions.member)


def _def_with(tmp_path, d, regions: str, groups: str):
    dp, _ = write_def_pair(d, d.initial, tmp_path / "b.def")
    text = dp.read_text().replace("END DESIGN", groups + "END DESIGN")
    dp.write_text(text.replace("COMPONENTS ", regions + "COMPONENTS ", 1))
    return dp, dp.read_text().splitlines()


def test_def_groups_with_wildcards_and_default_type(rent, tmp_path):
    d, _ = rent
    cells = [d.names[i] for i in np.flatnonzero(d.kind == CELL)]
    dp, _ = _def_with(tmp_path, d, "REGIONS 1 ;\n- r ( 0 0 ) ( 10000 10000 ) ;\nEND REGIONS\n",
                      f"GROUPS 1 ;\n- g c1? {cells[0]} {d.macros[0]} + REGION r ;\n"
                      "END GROUPS\n")
    with pytest.warns(UserWarning, match="not standard cells"):
        r = read_def(dp)
    assert r.regions.kind.tolist() == [1]  # no TYPE: read as a guide
    got = sorted(r.names[i] for i in r.regions.members(0))
    want = sorted({c for c in cells if len(c) == 3 and c.startswith("c1")} | {cells[0]})
    assert got == want


@pytest.mark.parametrize("regions, groups, match", [
    ("REGIONS 1 ;\n- r ( 0 0 ) ( 10 10 ) + TYPE WALL ;\nEND REGIONS\n", "",
     r"REGIONS: region 'r': TYPE WALL"),
    ("REGIONS 1 ;\n- r ( 0 0 ) ;\nEND REGIONS\n", "", "needs pairs of corner points"),
    ("REGIONS 1 ;\n- r ( 0 0 ) ( 10 10 ) ;\nEND REGIONS\n",
     "GROUPS 1 ;\n- g c1 + REGION q ;\nEND GROUPS\n", "names region 'q'"),
    ("REGIONS 1 ;\n- r ( 0 0 ) ( 10 10 ) ;\nEND REGIONS\n",
     "GROUPS 1 ;\n- g nobody + REGION r ;\nEND GROUPS\n", "no component named 'nobody'"),
])
def test_bad_def_regions_name_the_line(rent, tmp_path, regions, groups, match):
    d, _ = rent
    dp, lines = _def_with(tmp_path, d, regions, groups)
    with pytest.raises(DesignError, match=match) as e:
        read_def(dp)
    assert e.value.line is not None and lines[e.value.line - 1].startswith("- ")


def test_json_region_member_unknown_is_named(rent, tmp_path):
    d, _ = rent
    s = Session(d)
    s.add_region("f1", _box(d, 0, 0, .2, .2))
    s.assign_group("f1", _group(d)[:3])
    write_json(s.design, d.initial, tmp_path / "a.json")
    doc = json.loads((tmp_path / "a.json").read_text())
    doc["regions"][0]["members"][1] = "ghost"
    (tmp_path / "a.json").write_text(json.dumps(doc))
    with pytest.raises(DesignError, match=r"regions\[0\]\.members\[1\]: unknown block"):
        read_json(tmp_path / "a.json")


def test_a_region_without_members_changes_nothing_but_its_fence(rent):
    d, fp0 = rent
    s = Session(d)
    s.add_region("idle", _box(d, 0.1, 0.1, 0.3, 0.3), kind="guide")
    s.place()
    assert s.floorplan.identical(fp0)  # a guide without members: the same placement, bit for bit
    s.undo()
    s.remove_region("idle")
    s.add_region("empty", _box(d, 0.1, 0.1, 0.3, 0.3))
    s.place()
    cells = np.flatnonzero(d.kind == CELL)
    fence = shapely.box(*_box(d, 0.1, 0.1, 0.3, 0.3))
    assert shapely.area(shapely.intersection(_rects(s.floorplan, cells), fence)).max() == 0.0
