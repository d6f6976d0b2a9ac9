"""I/O pin assignment (floorwidget.floorplan.pins): slots, the assignment, constraints, the
Session action, the command line.

Outside references: brute force over every assignment and scipy's
``linear_sum_assignment`` on a cost matrix built here (the linear assignment problem: Kuhn,
Naval Research Logistics Quarterly, 1955), HPWL by its definition (the half perimeter of each
net's box), overlaps by shapely, slot coordinates derived by hand from the LEF pitches.
The test block "wren_io" and its library are invented for these tests.
"""

from __future__ import annotations

import itertools
import re
import warnings

import numpy as np
import pytest
from scipy.optimize import linear_sum_assignment
from shapely.geometry import box

import floorwidget as fw
from floorwidget.cli import main
from floorwidget.design import CELL, FIXED, TERMINAL, Design, DesignError
from floorwidget.floorplan.pins import (
    EDGES,
    PinConstraints,
    PinGroup,
    assign_pins,
    assign_pins_iterated,
    slot_pools,
)
from floorwidget.metrics import hpwl

# --- a small design built in Python ------------------------------------------------------------


def _tiny(cells, pins_to_cells, die=10.0, layers=(("m1", "V", 0.5), ("m2", "H", 2.0),
                                                   ("m3", "V", 2.0))):
    """Fixed 1 x 1 cells at ``cells`` (lower-left) and zero-size I/O pins, pin ``k`` on one
    net with the cells ``pins_to_cells[k]``; the pins start at the die's centre."""
    nc, npins = len(cells), len(pins_to_cells)
    names = [f"c{i}" for i in range(nc)] + [f"io{k}" for k in range(npins)]
    kind = [CELL] * nc + [TERMINAL] * npins
    width = [1.0] * nc + [0.0] * npins
    start, pb = [0], []
    for k, cs in enumerate(pins_to_cells):
        pb += [nc + k, *cs]
        start.append(len(pb))
    x = [c[0] for c in cells] + [die / 2] * npins
    y = [c[1] for c in cells] + [die / 2] * npins
    status = [FIXED] * nc + [0] * npins
    d = Design("tiny", (0, 0, die, die), names, kind, width, width, start, pb,
               np.zeros(len(pb)), np.zeros(len(pb)), x=x, y=y, status=status)
    d.routing_layers = list(layers)
    return d


def _net_hpwl(xs, ys) -> float:
    """HPWL by its definition: half the perimeter of the points' bounding box."""
    return float(np.ptp(xs) + np.ptp(ys))


def test_assignment_equals_brute_force_over_every_permutation():
    # four pins, slots by hand: m2 (horizontal, pitch 2) on the left and right edges, m3
    # (vertical, pitch 2) on the bottom and top; keep-out 3 leaves the tracks at 4 and 6.
    cells = [(1.0, 3.0), (8.5, 7.0), (4.5, 8.5), (6.0, 0.5), (0.5, 8.0)]
    d = _tiny(cells, [[0], [1, 3], [2, 4], [3]])
    slots = [(0, 4), (0, 6), (10, 4), (10, 6), (4, 0), (6, 0), (4, 10), (6, 10)]
    fp = assign_pins(d, d.initial, PinConstraints(corner_keepout=3.0))
    t = np.flatnonzero(d.kind == TERMINAL)
    got = set(zip(fp.x[t].tolist(), fp.y[t].tolist()))
    assert got <= set(slots) and len(got) == 4
    best = np.inf
    work = d.initial.copy()
    for perm in itertools.permutations(slots, 4):  # 1,680 assignments
        work.x[t] = [p[0] for p in perm]
        work.y[t] = [p[1] for p in perm]
        best = min(best, hpwl(d, work))
    assert hpwl(d, fp) == pytest.approx(best, abs=1e-9)
    # the assignment must have improved on the start (all pins in the middle of the die)
    assert hpwl(d, fp) < hpwl(d, d.initial) - 1.0


def test_assignment_equals_linear_sum_assignment_on_a_matrix_built_here():
    # many slots per edge (pitch 1, die 100): the solver's candidate pruning is in play
    rng = np.random.default_rng(7)
    cells = [tuple(v) for v in rng.uniform(5, 94, size=(30, 2))]
    nets = [sorted(rng.choice(30, size=rng.integers(1, 4), replace=False).tolist())
            for _ in range(14)]
    d = _tiny(cells, nets, die=100.0, layers=(("m1", "V", 0.5), ("m2", "H", 1.0),
                                              ("m3", "V", 1.0)))
    keep = 2.0
    ks = np.arange(2, 99)  # tracks k·1 µm with 2 <= k <= 98 (keep-out 2, zero-width pins)
    sx = np.concatenate([np.zeros(97), np.full(97, 100.0), ks, ks]).astype(float)
    sy = np.concatenate([ks, ks, np.zeros(97), np.full(97, 100.0)]).astype(float)
    cost = np.empty((len(nets), len(sx)))
    for p, cs in enumerate(nets):
        cx = np.array([cells[c][0] + 0.5 for c in cs])
        cy = np.array([cells[c][1] + 0.5 for c in cs])
        for s in range(len(sx)):
            cost[p, s] = _net_hpwl(np.append(cx, sx[s]), np.append(cy, sy[s]))
    r, c = linear_sum_assignment(cost)
    optimum = cost[r, c].sum()
    fp = assign_pins(d, d.initial, PinConstraints(corner_keepout=keep))
    t = np.flatnonzero(d.kind == TERMINAL)
    ours = sum(_net_hpwl(np.append([cells[c][0] + 0.5 for c in cs], fp.x[t[p]]),
                         np.append([cells[c][1] + 0.5 for c in cs], fp.y[t[p]]))
               for p, cs in enumerate(nets))
    assert ours == pytest.approx(optimum, rel=1e-12, abs=1e-9)
    on_slot = {(a, b) for a, b in zip(sx.tolist(), sy.tolist())}
    assert set(zip(fp.x[t].tolist(), fp.y[t].tolist())) <= on_slot
    # with a group: io10..io13 on the bottom edge between x = 30 and 34 (five slots)
    grp = PinConstraints([PinGroup("io1?", ("bottom",), (30.0, 34.0))], corner_keepout=keep)
    allowed = (sy == 0) & (sx >= 30) & (sx <= 34)
    limited = cost.copy()
    limited[10:, ~allowed] = 1e12
    r, c = linear_sum_assignment(limited)
    fp = assign_pins(d, d.initial, grp)
    ours = sum(_net_hpwl(np.append([cells[c][0] + 0.5 for c in cs], fp.x[t[p]]),
                         np.append([cells[c][1] + 0.5 for c in cs], fp.y[t[p]]))
               for p, cs in enumerate(nets))
    assert ours == pytest.approx(limited[r, c].sum(), rel=1e-12, abs=1e-9)
    assert np.all((fp.y[t[10:]] == 0) & (fp.x[t[10:]] >= 30) & (fp.x[t[10:]] <= 34))


def test_pins_on_no_net_and_the_rest_of_the_floorplan_stay_bit_for_bit():
    d = _tiny([(1.0, 3.0), (8.0, 7.0)], [[0], [1]])
    fp = assign_pins(d, d.initial, PinConstraints(corner_keepout=1.0))
    t = np.flatnonzero(d.kind == TERMINAL)
    others = np.setdiff1d(np.arange(d.num_blocks), t)
    assert np.array_equal(fp.x[others], d.initial.x[others])
    assert np.array_equal(fp.y[others], d.initial.y[others])
    assert not np.array_equal(fp.x[t], d.initial.x[t])
    assert d.initial.x[t[0]] == 5.0  # the input floorplan is not touched


# --- a LEF/DEF design ------------------------------------------------------------------------

LEF = """VERSION 5.8 ;
BUSBITCHARS "[]" ;
DIVIDERCHAR "/" ;
UNITS
  DATABASE MICRONS 1000 ;
END UNITS
LAYER m1
  TYPE ROUTING ;
  DIRECTION HORIZONTAL ;
  PITCH 0.2 ;
  WIDTH 0.1 ;
END m1
LAYER m2
  TYPE ROUTING ;
  DIRECTION VERTICAL ;
  PITCH 0.25 ;
  WIDTH 0.1 ;
END m2
LAYER m3
  TYPE ROUTING ;
  DIRECTION HORIZONTAL ;
  PITCH 0.4 ;
  WIDTH 0.2 ;
END m3
SITE wcore
  CLASS CORE ;
  SIZE 0.2 BY 2.0 ;
END wcore
MACRO buf_w
  CLASS CORE ;
  SIZE 0.6 BY 2.0 ;
  SITE wcore ;
  PIN A
    DIRECTION INPUT ;
    PORT
      LAYER m1 ;
        RECT 0.1 0.9 0.2 1.1 ;
    END
  END A
  PIN Y
    DIRECTION OUTPUT ;
    PORT
      LAYER m1 ;
        RECT 0.4 0.9 0.5 1.1 ;
    END
  END Y
END buf_w
END LIBRARY
"""

# u_k sits at x = 36 - 4k: the wirelength alone would put data[k] in falling order along x
_COMPS = [(f"u{k}", 36000 - 4000 * k, 4000 + 2000 * (k % 4)) for k in range(6)] + \
    [("u6", 2000, 20000), ("u7", 30000, 26000)]


def _def_text() -> str:
    rows = "\n".join(f"ROW r{r} wcore 1000 {2000 + 2000 * r} {'N' if r % 2 == 0 else 'FS'} "
                     f"DO 190 BY 1 STEP 200 0 ;" for r in range(13))
    comps = "\n".join(f"- {n} buf_w + PLACED ( {x} {y} ) N ;" for n, x, y in _COMPS)
    pins = [f"- data[{k}] + NET data[{k}] + DIRECTION INPUT + USE SIGNAL\n"
            f"  + LAYER m2 ( -50 0 ) ( 50 200 )\n  + PLACED ( {20000 + 300 * k} 0 ) N ;"
            for k in range(6)]
    pins += ["- ctl_a + NET ctl_a + DIRECTION INPUT + USE SIGNAL\n"
             "  + LAYER m3 ( 0 -100 ) ( 200 100 )\n  + PLACED ( 0 15000 ) N ;",
             "- ctl_b + NET ctl_b + DIRECTION INPUT + USE SIGNAL\n"
             "  + LAYER m3 ( 0 -100 ) ( 200 100 )\n  + PLACED ( 0 16000 ) N ;",
             "- spare_i + NET spare_i + DIRECTION INPUT + USE SIGNAL\n"
             "  + PLACED ( 0 5000 ) N ;",
             "- rst_n + NET rst_n + DIRECTION INPUT + USE SIGNAL\n"
             "  + LAYER m2 ( -50 -200 ) ( 50 0 )\n  + FIXED ( 20000 30000 ) N ;"]
    nets = [f"- data[{k}] ( PIN data[{k}] ) ( u{k} A ) ;" for k in range(6)]
    nets += ["- ctl_a ( PIN ctl_a ) ( u6 Y ) ;", "- ctl_b ( PIN ctl_b ) ( u7 Y ) ;",
             "- spare_i ( PIN spare_i ) ( u0 Y ) ;", "- rst_n ( PIN rst_n ) ( u5 Y ) ;"]
    return (f"VERSION 5.8 ;\nDIVIDERCHAR \"/\" ;\nBUSBITCHARS \"[]\" ;\nDESIGN wren_io ;\n"
            f"UNITS DISTANCE MICRONS 1000 ;\nDIEAREA ( 0 0 ) ( 40000 30000 ) ;\n{rows}\n"
            f"TRACKS X 125 DO 160 STEP 250 LAYER m2 ;\n"
            f"COMPONENTS {len(_COMPS)} ;\n{comps}\nEND COMPONENTS\n"
            f"PINS {len(pins)} ;\n" + "\n".join(pins) + "\nEND PINS\n"
            f"NETS {len(nets)} ;\n" + "\n".join(nets) + "\nEND NETS\nEND DESIGN\n")


@pytest.fixture
def wren(tmp_path):
    (tmp_path / "wren.lef").write_text(LEF)
    (tmp_path / "wren_io.def").write_text(_def_text())
    return tmp_path / "wren_io.def", tmp_path / "wren.lef"


@pytest.fixture
def wren_design(wren):
    return fw.load(wren[0], lef=[str(wren[1])])


def _pin_centres(design, fp, names):
    cx, cy = fp.centres()
    idx = [design.block(n) for n in names]
    return cx[idx], cy[idx]


DATA = [f"data[{k}]" for k in range(6)]


def test_slots_lie_on_the_lef_pitch(wren_design):
    d = wren_design
    assert d.io_layers["data[0]"] == "m2" and d.io_layers["ctl_a"] == "m3"
    assert "spare_i" not in d.io_layers  # no LAYER: the edge's default layer
    # by hand: m2 is vertical, pitch 0.25 µm: slots on the bottom and top edges at k·0.25;
    # pins 0.1 µm wide, keep-out 1 µm: 1 + 0.05 <= x <= 40 - 1 - 0.05, k = 5 .. 155
    pools = slot_pools(d, {("m2", 1): 0.1}, 1.0, [("m2", 1)])
    assert np.allclose(pools[("m2", 1)].pos, np.arange(5, 156) * 0.25)
    # m3 horizontal, pitch 0.4, pins 0.2 wide: 1.1 <= y <= 28.9, k = 3 .. 72
    pools = slot_pools(d, {("m3", 0): 0.2}, 1.0, [("m3", 0)])
    assert np.allclose(pools[("m3", 0)].pos, np.arange(3, 73) * 0.4)
    # a pin 0.3 wide on m2 takes every second track: no two overlap
    pools = slot_pools(d, {("m2", 3): 0.3}, 1.0, [("m2", 3)])
    assert np.allclose(np.diff(pools[("m2", 3)].pos), 0.5)
    fp = assign_pins(d, d.initial, PinConstraints(corner_keepout=1.0))
    cx, cy = _pin_centres(d, fp, DATA)
    assert np.allclose(cx / 0.25, np.round(cx / 0.25), atol=1e-9)
    assert set(np.round(cy, 9).tolist()) <= {0.1, 29.9}  # shape 0.2 deep, touching the edge
    cx, cy = _pin_centres(d, fp, ["ctl_a", "ctl_b"])
    assert np.allclose(cy / 0.4, np.round(cy / 0.4), atol=1e-9)
    assert set(np.round(cx, 9).tolist()) <= {0.1, 39.9}
    # spare_i (no layer) sits on the default layer of its edge: m3 on left/right, m2 else
    sx, sy = _pin_centres(d, fp, ["spare_i"])
    on_side = sx[0] in (0.0, 40.0)
    pitch = 0.4 if on_side else 0.25
    along = sy[0] if on_side else sx[0]
    assert abs(along / pitch - round(along / pitch)) < 1e-9


def _layer_of(design, fp, i):
    nm = design.io_layers.get(design.names[i])
    if nm is not None:
        return nm
    cx, cy = fp.centres()
    return "m3" if cx[i] in (design.die[0], design.die[2]) else "m2"


def _no_overlaps(design, fp):
    """Pairs of I/O pin shapes on one layer that share area (shapely)."""
    t = np.flatnonzero(design.kind == TERMINAL)
    r = fp.rects()
    shapes = [(_layer_of(design, fp, i), box(*r[i])) for i in t.tolist()]
    return [(a, b) for (la, a), (lb, b) in itertools.combinations(shapes, 2)
            if la == lb and a.intersection(b).area > 1e-12]


def test_no_two_pins_on_a_layer_overlap_even_when_crowded(wren_design):
    d = wren_design
    # all six data pins and the fixed rst_n squeezed near x = 20 on the top edge
    cons = PinConstraints([PinGroup("data[*]", ("top",), (19.0, 21.0))], corner_keepout=1.0)
    fp = assign_pins(d, d.initial, cons)
    assert _no_overlaps(d, fp) == []
    cx, cy = _pin_centres(d, fp, DATA)
    assert np.all((cx >= 19.0) & (cx <= 21.0)) and np.allclose(cy, 29.9)
    # the check can fail: two pins put on one slot overlap
    bad = fp.copy()
    bad.x[d.block("data[1]")] = bad.x[d.block("data[0]")]
    bad.y[d.block("data[1]")] = bad.y[d.block("data[0]")]
    assert _no_overlaps(d, bad)


def test_bus_order_and_edge_are_kept(wren_design):
    d = wren_design
    free = assign_pins(d, d.initial, PinConstraints(corner_keepout=1.0))
    fx, _ = _pin_centres(d, free, DATA)
    assert (np.diff(fx) < 0).all()  # the cells pull the bus into falling order ...
    cons = PinConstraints([PinGroup("data[*]", ("bottom",), ordered=True)], corner_keepout=1.0)
    fp = assign_pins(d, d.initial, cons)
    cx, cy = _pin_centres(d, fp, DATA)
    assert (np.diff(cx) > 0).all()  # ... and the constraint keeps index order along the edge
    assert np.allclose(cy, 0.1)
    assert sorted(cx.tolist()) == sorted(fx.tolist())  # one layer: the same slots, reordered


def test_corner_keepout_and_held_pins(wren_design):
    d = wren_design
    s = fw.Session(d)
    s.pin("ctl_a")
    before = s.floorplan.copy()
    s.assign_pins(corner_keepout=6.0, held=["ctl_b"])
    fp = s.floorplan
    for nm in ("ctl_a", "ctl_b", "rst_n"):  # pinned, held by name, fixed by the input
        assert fp.position(nm) == before.position(nm)
    cx, cy = _pin_centres(d, fp, [*DATA, "spare_i"])
    along = np.where((cx == 0) | (cx == 40), cy, cx)
    length = np.where((cx == 0) | (cx == 40), 30.0, 40.0)
    assert (along >= 6.0).all() and (along <= length - 6.0).all()
    assert _no_overlaps(d, fp) == []


def test_bad_constraints_are_one_line_errors(wren_design):
    d = wren_design
    with pytest.raises(DesignError, match=r"pin group 'data\[\*\]': 6 pins but only 3 free "
                                          r"slots") as e:
        assign_pins(d, d.initial, PinConstraints([PinGroup("data[*]", ("top",), (10, 10.6))]))
    assert "\n" not in str(e.value)
    with pytest.raises(DesignError, match="pin group 'dq_\\*' matches no I/O pin"):
        assign_pins(d, d.initial, PinConstraints([PinGroup("dq_*", ("top",))]))
    with pytest.raises(DesignError, match="cannot reach edges left"):
        assign_pins(d, d.initial, PinConstraints([PinGroup("data[*]", ("left",))]))
    with pytest.raises(DesignError, match="edges must be among"):
        PinGroup("data[*]", ("north",))
    with pytest.raises(DesignError, match="held pin 'nosuch'"):
        assign_pins(d, d.initial, PinConstraints(held=("nosuch",)))
    s = fw.Session(d)
    with pytest.raises(DesignError):
        s.assign_pins([{"pattern": "data[*]", "edges": ["top"], "span": [10, 10.6]}])
    assert s.floorplan.identical(d.initial) and not s.can_undo  # nothing changed


def test_session_action_undo_redo_log_and_script(wren_design, tmp_path):
    d = wren_design
    s = fw.Session(d)
    groups = [{"pattern": "data[*]", "edges": ["bottom"], "ordered": True}]
    moved = s.assign_pins(groups, corner_keepout=1.0)
    assert moved >= 6
    after = s.floorplan.copy()
    assert hpwl(d, after) < hpwl(d, d.initial)
    s.undo()
    assert s.floorplan.identical(d.initial)
    s.redo()
    assert s.floorplan.identical(after)
    assert s.log[0] == {"op": "assign_pins", "args": [],
                        "kwargs": {"groups": groups, "corner_keepout": 1.0}}
    text = s.script()
    assert "session.assign_pins(groups=[{'pattern': 'data[*]'" in text
    ns: dict = {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        exec(compile(text, "replay", "exec"), ns)  # the replay rebuilds the same floorplan
    assert ns["session"].floorplan.identical(after)
    s.save(tmp_path / "pins.session.json")  # a session file keeps the action too
    back = fw.Session.load(tmp_path / "pins.session.json")
    assert back.floorplan.identical(after) and back.log == s.log


def test_moving_an_io_pin_snaps_to_a_free_slot(wren_design):
    d = wren_design
    s = fw.Session(d)
    # data[2] (m2, vertical tracks) asked near the top edge at x = 12.33: the top edge's
    # nearest m2 track is 12.25 (pitch 0.25); the shape (0.1 x 0.2) touches the edge
    x, y = s.move("data[2]", 12.33 - 0.05, 29.5)
    assert (x, y) == pytest.approx((12.25 - 0.05, 29.8))
    # data[3] asked onto the same place takes the next free track, not data[2]'s
    x3, y3 = s.move("data[3]", 12.33 - 0.05, 29.5)
    assert y3 == pytest.approx(29.8) and abs(x3 - x) == pytest.approx(0.25)
    # a request near the left edge: m2 cannot reach it, so the nearest edge m2 crosses
    x4, y4 = s.move("data[4]", 0.2, 3.0)
    assert y4 == pytest.approx(0.0) and (x4 + 0.05) / 0.25 == pytest.approx(
        round((x4 + 0.05) / 0.25))
    assert _no_overlaps(d, s.floorplan) == []


def _statements(text: str) -> dict[str, list[str]]:
    """DEF statements per section (whitespace normalised), read independently of the
    reader: a section runs from its keyword to ``END keyword``."""
    out: dict[str, list[str]] = {}
    section = "HEADER"
    for st in text.split(";"):
        st = " ".join(st.split())
        m = re.match(r"(?:END (\w+) )?(\w+)", st)
        if m and m.group(1) == section:
            section = "HEADER"
            st = st[len(m.group(0)) - len(m.group(2)):]
        head = st.split(" ")[0] if st else ""
        if head in ("COMPONENTS", "PINS", "NETS") and section == "HEADER":
            section = head
            continue
        out.setdefault(section, []).append(st)
    return out


def test_cli_pins_only_changes_only_pin_placements(wren, tmp_path, capsys):
    src, lef = wren
    out = tmp_path / "out.def"
    assert main(["place", str(src), "--lef", str(lef), "--pins-only", "-o", str(out)]) == 0
    a, b = _statements(src.read_text()), _statements(out.read_text())
    assert set(a) == set(b)
    for sec in a:
        if sec != "PINS":
            assert a[sec] == b[sec], sec
    place = re.compile(r"\+ (?:PLACED|FIXED) \( -?\d+ -?\d+ \) \w+")
    assert [place.sub("", x) for x in a["PINS"]] == [place.sub("", x) for x in b["PINS"]]
    assert a["PINS"] != b["PINS"]  # the pins did move
    d0 = fw.load(src, lef=[str(lef)])
    d1 = fw.load(out, lef=[str(lef)])
    assert hpwl(d1, d1.initial) < hpwl(d0, d0.initial)
    assert d1.initial.position("rst_n") == d0.initial.position("rst_n")  # FIXED stays
    capsys.readouterr()
    # bad input: exit 2, one line, no output file
    bad = tmp_path / "bad.def"
    bad.write_text(_def_text().replace("PINS 10 ;", "PINS 11 ;"))
    gone = tmp_path / "never.def"
    assert main(["place", str(bad), "--lef", str(lef), "--pins-only", "-o", str(gone)]) == 2
    assert not gone.exists()
    assert len(capsys.readouterr().err.strip().splitlines()) == 1


def test_iterated_assignment_with_placement(wren_design):
    d = wren_design
    fp = assign_pins_iterated(d, d.initial, PinConstraints(corner_keepout=1.0), rounds=1,
                              target_density=0.8)
    trace = fp.info["pin_rounds"]
    assert len(trace) == 2 and np.isfinite(trace).all()
    assert hpwl(d, fp) == pytest.approx(trace[-1])
    assert _no_overlaps(d, fp) == []
    assert fp.position("rst_n") == d.initial.position("rst_n")


@pytest.mark.slow
def test_ariane136_assignment_beats_the_designs_own_pins(ariane136):
    d = ariane136
    own = d.initial
    fp = assign_pins(d, own)
    t = np.flatnonzero(d.kind == TERMINAL)
    rest = np.setdiff1d(np.arange(d.num_blocks), t)
    assert np.array_equal(fp.x[rest], own.x[rest]) and np.array_equal(fp.y[rest], own.y[rest])
    assert hpwl(d, fp) < hpwl(d, own)
    assert fp.info["pins"]["assigned"] > 400
    # no two pins on one layer overlap (shapely, per layer, sorted sweep along each edge)
    r = fp.rects()
    by_layer: dict[str, list[int]] = {}
    for i in t.tolist():
        by_layer.setdefault(d.io_layers.get(d.names[i], "?"), []).append(i)
    for idx in by_layer.values():
        order = sorted(idx, key=lambda i: (r[i, 0], r[i, 1]))
        shapes = [box(*r[i]) for i in order]
        for k in range(len(shapes)):
            for m in range(k + 1, min(k + 40, len(shapes))):
                assert shapes[k].intersection(shapes[m]).area < 1e-9
    assert EDGES  # the edges are named for the messages


def test_widget_pin_drag_snaps_through_session_move(wren_design):
    pytest.importorskip("bqplot")
    from floorwidget.widget import FloorplanWidget

    d = wren_design
    w = FloorplanWidget(d)
    t = np.flatnonzero(d.kind == TERMINAL)
    k = int(np.flatnonzero(t == d.block("data[2]"))[0])
    assert w.dragging.ctx.canvas.marks["terminals"].enable_move
    out = w.drop_pin(k, 12.33, 29.9)  # the centre dropped near the top edge
    # the same place Session.move gives (see test_moving_an_io_pin_snaps_to_a_free_slot)
    assert out["position"] == pytest.approx((12.25 - 0.05, 29.8))
    assert w.session.log[-1]["op"] == "move"
    tm = w.dragging.ctx.canvas.marks["terminals"]
    assert tm.x[k] == pytest.approx(12.25) and tm.y[k] == pytest.approx(29.9)
    w.session.undo()
    assert w.session.floorplan.identical(d.initial)
    assert w.drop_pin(int(np.flatnonzero(t == d.block("rst_n"))[0]), 5.0, 29.9)["message"]
