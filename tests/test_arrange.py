"""Hand arrangement of macros (floorwidget.arrange and the Session actions over it).

Every geometric check is against a closed form: equal edges, equal gaps, an array step
``pitch`` or ``ceil((size + facing halo) / grid) * grid``, a mirror image ``x -> 2c - x``
(an involution: mirroring twice is the identity), a rigid translation.  The halo rule of the
abutted array is checked with shapely (footprint against the other macros' halo boxes; the
rule itself is common practice).  Undo, redo and replay are checked bit for bit.
"""

from __future__ import annotations

import os
import subprocess
import sys
import tracemalloc

import numpy as np
import pytest

import floorwidget as fw
from floorwidget import arrange
from floorwidget.design import MACRO, Design, DesignError
from floorwidget.session import Session

GRID = 2.0  # the synthetic design's grid: every size is a whole number of steps


def _grid_design() -> Design:
    """Six macros with sizes of whole grid steps, unequal halos, and one pin each off-centre."""
    w = [40.0, 60.0, 80.0, 40.0, 100.0, 20.0]
    h = [20.0, 32.0, 40.0, 24.0, 60.0, 20.0]
    halo = [[4, 6, 2, 8], [2, 2, 10, 2], [6, 4, 4, 0], [0, 0, 0, 0], [8, 2, 2, 2], [2, 2, 2, 2]]
    n = len(w)
    names = [f"m{i}" for i in range(n)] + ["c0"]
    kind = [MACRO] * n + [2]
    pdx = [wi / 4 for wi in w] + [0.0]
    pdy = [hi / 8 for hi in h] + [0.0]
    return Design("grid6", (0, 0, 1000, 800), names, kind, w + [4.0], h + [4.0],
                  [0, n + 1], np.arange(n + 1), pdx, pdy, halo=halo + [[0, 0, 0, 0]],
                  grid_pitch=(GRID, GRID), grid_origin=(0.0, 0.0),
                  x=[100, 300, 520, 700, 160, 860, 500], y=[100, 420, 200, 600, 560, 80, 500])


@pytest.fixture
def g():
    d = _grid_design()
    return d, Session(d)


MACROS = [f"m{i}" for i in range(6)]


def _state(fp):
    return tuple(a.copy() for a in (fp.x, fp.y, fp.orient, fp.status))


def _same(a, b) -> bool:
    return all(np.array_equal(p.view(np.uint8), q.view(np.uint8)) for p, q in zip(a, b))


def _rects(fp, names, halo=False):
    d = fp.design
    return fp.rects(halo=halo)[[d.block(n) for n in names]]


def _on_grid(v, o, p):
    return np.allclose((np.asarray(v) - o) / p, np.round((np.asarray(v) - o) / p), atol=1e-9)


# --- align -----------------------------------------------------------------------------------


@pytest.mark.parametrize("side, col, how", [
    ("left", 0, "min"), ("bottom", 1, "min"), ("right", 2, "max"), ("top", 3, "max")])
def test_align_edges_equal_the_outermost(g, side, col, how):
    d, s = g
    before = _rects(s.floorplan, MACROS)
    s.align(MACROS, side)
    r = _rects(s.floorplan, MACROS)
    target = getattr(before[:, col], how)()
    assert np.all(r[:, col] == target)  # exact: sizes are whole grid steps
    other = 1 - (col % 2)  # the other axis keeps its value
    assert np.array_equal(r[:, other], before[:, other])


@pytest.mark.parametrize("side, lo, hi", [("x_centre", 0, 2), ("y_centre", 1, 3)])
def test_align_centres_on_the_bounding_box_centre_line(g, side, lo, hi):
    d, s = g
    before = _rects(s.floorplan, MACROS)
    mid = (before[:, lo].min() + before[:, hi].max()) / 2
    s.align(MACROS, side)
    r = _rects(s.floorplan, MACROS)
    centre = (r[:, lo] + r[:, hi]) / 2
    # a half-size of whole grid steps may be an odd number of half steps: within half a step
    assert np.all(np.abs(centre - mid) <= GRID / 2 + 1e-9)
    sizes = r[:, hi] - r[:, lo]
    even = (sizes / GRID) % 2 == 0
    assert np.all(centre[even] == centre[even][0])


def test_align_on_the_demo_snaps_and_stays_in_the_core(demo_design):
    d = demo_design
    s = Session(d)
    names = ["sram_sp4k_0", "sram_sp2k_0", "rf_512_0", "clk_gen"]
    for k, nm in enumerate(names):
        s.move(nm, 300.0 + 410 * k, 1500.0 - 300 * k)
    s.align(names, "top")
    fp = s.floorplan
    r = _rects(fp, names)
    top = r[:, 3].max()
    # heights are not whole steps of the 1.8 µm grid: top edges within half a step
    assert np.all(np.abs(r[:, 3] - top) <= d.grid_pitch[1] / 2 + 1e-9)
    idx = [d.block(n) for n in names]
    assert _on_grid(fp.x[idx], d.grid_origin[0], d.grid_pitch[0])
    assert _on_grid(fp.y[idx], d.grid_origin[1], d.grid_pitch[1])
    c = d.core
    assert np.all(r[:, 0] >= c[0]) and np.all(r[:, 2] <= c[2])
    assert np.all(r[:, 1] >= c[1]) and np.all(r[:, 3] <= c[3])


# --- distribute ------------------------------------------------------------------------------


def test_distribute_gaps_equal_outer_macros_stay(g):
    d, s = g
    names = ["m0", "m1", "m2", "m3"]  # widths 40, 60, 80, 40
    xs = [100.0, 150.0, 400.0, 700.0]  # span 100..740, free 640 - 220 = 420, gap 140
    for nm, x in zip(names, xs):
        s.move(nm, x, 300.0)
    s.distribute(names, "x")
    r = _rects(s.floorplan, names)
    order = np.argsort(r[:, 0])
    gaps = r[order[1:], 0] - r[order[:-1], 2]
    assert np.all(gaps == 140.0)
    assert r[order[0], 0] == 100.0 and r[order[-1], 2] == 740.0


def test_distribute_gaps_within_one_grid_step(g):
    d, s = g
    rng = np.random.default_rng(3)
    for _ in range(5):
        for nm in MACROS:
            s.move(nm, float(rng.uniform(0, 600)), float(rng.uniform(0, 700)))
        before = _rects(s.floorplan, MACROS)
        s.distribute(MACROS, "y")
        r = _rects(s.floorplan, MACROS)
        order = np.argsort((before[:, 1] + before[:, 3]) / 2, kind="stable")
        gaps = r[order[1:], 1] - r[order[:-1], 3]
        span = before[order[-1], 3] - before[order[0], 1]
        ideal = (span - (r[:, 3] - r[:, 1]).sum()) / (len(MACROS) - 1)
        assert np.all(np.abs(gaps - ideal) <= GRID + 1e-9)
        assert r[order[0], 1] == before[order[0], 1] and r[order[-1], 3] == before[order[-1], 3]


# --- array -----------------------------------------------------------------------------------


def test_array_with_a_pitch_is_exact(demo_design):
    d = demo_design
    s = Session(d)
    names = [f"sram_sp4k_{i}" for i in range(8)]
    res = s.array(names, 2, 4, pitch=(230.0, 171.0))  # 171 is 95 steps of 1.8 µm
    fp = s.floorplan
    idx = [d.block(n) for n in names]
    x, y = fp.x[idx].reshape(2, 4), fp.y[idx].reshape(2, 4)
    assert res.pitch == (230.0, 171.0) and res.notes == ()
    assert np.all(np.diff(x, axis=1) == 230.0) and np.all(x[0] == x[1])
    assert np.allclose(np.diff(y, axis=0), 171.0, rtol=0, atol=1e-9) and np.all(y[:, :1] == y)
    # a pitch off the grid is rounded to it and said so
    res = s.array(names, 2, 4, pitch=(230.4, 170.2))  # 170.2 / 1.8 = 94.6
    assert res.pitch[0] == 230.0 and abs(res.pitch[1] - 171.0) < 1e-9 and res.notes
    # a pitch along x only: the rows abut (150 µm + the 5 µm halo, rounded up to 1.8 µm steps)
    res = s.array(names, 2, 4, pitch=(230.0, None))
    y = s.floorplan.y[idx].reshape(2, 4)
    assert res.pitch[0] == 230.0 and abs(res.pitch[1] - np.ceil(155 / 1.8) * 1.8) < 1e-9
    assert np.allclose(np.diff(y, axis=0), res.pitch[1], rtol=0, atol=1e-9)


def test_array_abutted_under_the_halo_rule(g):
    pytest.importorskip("shapely")
    from shapely.geometry import box

    d, s = g
    res = s.array(MACROS, 2, 3)
    fp = s.floorplan
    foot = _rects(fp, MACROS)
    halo = _rects(fp, MACROS, halo=True)
    idx = [d.block(n) for n in MACROS]
    w, h = d.width[idx], d.height[idx]
    hl, hb, hr, ht = d.halo[idx].T
    # column steps: widest of the column + the larger facing halo, rounded up to the grid
    col = np.arange(6) % 3
    row = np.arange(6) // 3
    cw = [w[col == j].max() for j in range(3)]
    step0 = np.ceil((cw[0] + max(hr[col == 0].max(), hl[col == 1].max())) / GRID) * GRID
    step1 = np.ceil((cw[1] + max(hr[col == 1].max(), hl[col == 2].max())) / GRID) * GRID
    rh0 = h[row == 0].max()
    rstep = np.ceil((rh0 + max(ht[row == 0].max(), hb[row == 1].max())) / GRID) * GRID
    x0, y0 = foot[0, 0], foot[0, 1]
    assert np.array_equal(foot[:, 0], x0 + np.array([0, step0, step0 + step1] * 2))
    assert np.array_equal(foot[:, 1], y0 + np.repeat([0.0, rstep], 3))
    assert res.pitch == (step0, rstep)

    # halo rule (shapely): no footprint overlaps another macro's halo box
    def conflicts(f, hb_):
        return sum(box(*f[a]).intersection(box(*hb_[b])).area > 1e-9
                   for a in range(6) for b in range(6) if a != b)

    assert conflicts(foot, halo) == 0
    assert fw.evaluate(d, fp)["macro_overlaps"] == 0
    # abutted means tight: one grid step closer and the first two columns conflict
    f2, h2 = foot.copy(), halo.copy()
    f2[col >= 1, 0::2] -= GRID
    h2[col >= 1, 0::2] -= GRID
    assert conflicts(f2, h2) > 0


def test_array_refuses_too_few_cells_and_bad_pitch(g):
    d, s = g
    before, log = _state(s.floorplan), s.log
    for args, kw in [((2, 2), {}), ((0, 9), {}), ((2, 3), {"pitch": -5.0}),
                     ((2, 3), {"pitch": (1.0, float("nan"))}), ((2, 3), {"pitch": "wide"})]:
        with pytest.raises(DesignError):
            s.array(MACROS, *args, **kw)
    assert _same(_state(s.floorplan), before) and s.log == log


@pytest.mark.parametrize("huge, small", [((10**9, 10**9), (1, 6)), ((10**30, 2), (3, 2)),
                                         ((2, 10**18), (1, 6))])
def test_absurd_array_sizes_cost_what_the_filled_cells_cost(g, huge, small):
    # cells past the last macro are empty: arrange.array gives the smallest array that holds
    # the macros in the same row-by-row order, and nothing of the absurd size is allocated;
    # the Session refuses such a request outright, before anything is allocated either
    d, s = g
    idx = np.array([d.block(m) for m in MACROS])
    want = arrange.array(d, s.floorplan, idx, *small)
    tracemalloc.start()
    try:
        got = arrange.array(d, s.floorplan, idx, *huge)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    np.testing.assert_array_equal(got.x, want.x)
    np.testing.assert_array_equal(got.y, want.y)
    assert peak < 8 << 20
    before, log = _state(s.floorplan), s.log
    with pytest.raises(DesignError, match="at most 6"):
        s.array(MACROS, *huge)
    assert _same(_state(s.floorplan), before) and s.log == log


# --- mirror ----------------------------------------------------------------------------------


@pytest.mark.parametrize("axis", ["x", "y"])
def test_mirror_is_the_reflection_about_the_centre(g, axis):
    d, s = g
    s.set_orientation("m2", "E")
    s.set_orientation("m4", "FS")
    fp0 = s.floorplan
    idx = [d.block(n) for n in MACROS]
    r0 = fp0.rects()[idx]
    lo, hi = (0, 2) if axis == "x" else (1, 3)
    c2 = r0[:, lo].min() + r0[:, hi].max()  # twice the centre line
    px0, py0 = fp0.pin_positions()
    s.mirror(MACROS, axis)
    fp1 = s.floorplan
    r1 = fp1.rects()[idx]
    # closed form: [a, b] -> [c2 - b, c2 - a] along the axis, unchanged across it
    assert np.array_equal(r1[:, lo], c2 - r0[:, hi]) and np.array_equal(r1[:, hi], c2 - r0[:, lo])
    other = [1, 3] if axis == "x" else [0, 2]
    assert np.array_equal(r1[:, other], r0[:, other])
    # the pins are mirrored with the footprints: the orientation follows the reflection
    px1, py1 = fp1.pin_positions()
    pins = np.isin(d.pin_block, idx)
    if axis == "x":
        assert np.allclose(px1[pins], c2 - px0[pins]) and np.allclose(py1[pins], py0[pins])
    else:
        assert np.allclose(py1[pins], c2 - py0[pins]) and np.allclose(px1[pins], px0[pins])


@pytest.mark.parametrize("axis", ["x", "y"])
def test_mirror_twice_is_the_identity_on_the_demo(demo_design, axis):
    d = demo_design
    s = Session(d)
    names = ["sram_sp4k_0", "sram_sp2k_1", "rf_512_2", "sram_dp1k_0", "clk_gen"]
    for k, nm in enumerate(names):  # heights are not whole steps of the 1.8 µm grid
        s.move(nm, 400.0 + 237.3 * k, 300.0 + 181.7 * k)
    s.rotate("sram_dp1k_0")
    before = _state(s.floorplan)
    s.mirror(names, axis)
    assert not _same(_state(s.floorplan), before)
    idx = [d.block(n) for n in names]
    assert _on_grid(s.floorplan.y[idx], d.grid_origin[1], d.grid_pitch[1])
    s.mirror(names, axis)
    assert _same(_state(s.floorplan), before)


def test_mirror_keeps_footprints_apart_with_sizes_off_the_grid(demo_design):
    pytest.importorskip("shapely")
    from shapely.geometry import box

    d = demo_design
    s = Session(d)
    oy, py = d.grid_origin[1], d.grid_pitch[1]
    # rf_512 is 70 µm = 38.9 steps tall, sram_sp2k 110 µm = 61.1 steps: stacked as close as
    # the 1.8 µm grid allows (0.2 µm apart), their mirror image must not overlap either
    s.move("rf_512_0", 600.0, 400.0)
    top = s.floorplan.rects()[d.block("rf_512_0"), 3]
    s.move("sram_sp2k_0", 600.0, oy + np.ceil((top - oy) / py) * py)
    names = ["rf_512_0", "sram_sp2k_0"]
    a, b = _rects(s.floorplan, names)
    assert box(*a).intersection(box(*b)).area == 0
    s.mirror(names, "y")
    a, b = _rects(s.floorplan, names)
    assert b[3] <= a[1]  # the order along y is reversed
    assert box(*a).intersection(box(*b)).area == 0


def test_mirror_refuses_a_disallowed_orientation(demo_design):
    s = Session(demo_design)
    before = _state(s.floorplan)
    with pytest.raises(DesignError, match="adc_front.*allowed"):
        s.mirror(["sram_sp4k_0", "adc_front"], "y")  # adc_front allows N and FN only
    assert _same(_state(s.floorplan), before) and s.log == []


# --- push, shift -----------------------------------------------------------------------------


def test_push_to_the_nearest_core_edge_keeps_the_shape(g):
    d, s = g
    names = ["m0", "m1", "m5"]
    r0 = _rects(s.floorplan, names)
    c = d.core
    gaps = {"left": r0[:, 0].min() - c[0], "right": c[2] - r0[:, 2].max(),
            "bottom": r0[:, 1].min() - c[1], "top": c[3] - r0[:, 3].max()}
    nearest = min(gaps, key=gaps.get)
    res = s.push(names)
    assert res.notes == (f"pushed to the {nearest} core edge",)
    r1 = _rects(s.floorplan, names)
    d_xy = r1 - r0
    assert np.all(d_xy == d_xy[0])  # a rigid translation
    k = {"left": 0, "bottom": 1, "right": 2, "top": 3}[nearest]
    edge = (r1[:, k].min() if k < 2 else r1[:, k].max())
    assert edge == c[k]
    for side, k in (("top", 3), ("right", 2)):
        s.push(names, side)
        assert _rects(s.floorplan, names)[:, k].max() == d.core[k]


def test_shift_moves_as_one_and_stops_at_the_core_edge(g):
    d, s = g
    names = ["m0", "m2"]
    s.pin("m2")  # a hand move: pinned macros may be shifted and stay pinned
    r0 = _rects(s.floorplan, names)
    s.shift(names, 10.0, -4.0)
    assert np.array_equal(_rects(s.floorplan, names), r0 + [10.0, -4.0, 10.0, -4.0])
    assert s.floorplan.status_of("m2") == "pinned"
    res = s.shift(names, 5000.0, 0.0)
    r2 = _rects(s.floorplan, names)
    assert r2[:, 2].max() == d.core[2] and res.notes
    assert np.array_equal(r2[1] - r2[0], r0[1] - r0[0])


# --- refusals, undo, replay ------------------------------------------------------------------


@pytest.mark.parametrize("call", [
    lambda s: s.align(["m0", "m1"], "left"), lambda s: s.distribute(["m0", "m1", "m3"]),
    lambda s: s.array(["m0", "m1"], 1, 2), lambda s: s.mirror(["m0", "m1"]),
    lambda s: s.push(["m0", "m1"])])
def test_pinned_macros_are_refused_and_nothing_changes(g, call):
    d, s = g
    s.pin("m1")
    before, log, hist = _state(s.floorplan), s.log, s.history
    with pytest.raises(DesignError, match="'m1' is pinned"):
        call(s)
    assert _same(_state(s.floorplan), before) and s.log == log and s.history == hist


def test_bad_requests_are_refused(g):
    d, s = g
    with pytest.raises(DesignError, match="no block named 'nope'"):
        s.align(["m0", "nope"], "left")
    with pytest.raises(DesignError, match="not a macro"):
        s.align(["m0", "c0"], "left")
    with pytest.raises(DesignError, match="one of"):
        s.align(["m0", "m1"], "middle")
    with pytest.raises(DesignError, match="named twice"):
        s.align(["m0", "m0"], "left")
    with pytest.raises(DesignError, match="at least 3"):
        s.distribute(["m0", "m1"])
    with pytest.raises(DesignError, match="finite"):
        s.shift(["m0"], float("inf"), 0.0)
    with pytest.raises(DesignError, match="allow"):
        Session(fw.load(os.path.join(os.path.dirname(__file__), "..", "demo_data",
                                     "heron_dsp.json"))).set_orientation("adc_front", "E")
    assert s.history == []


def _all_actions(s):
    s.align(MACROS[:3], "right")
    s.distribute(MACROS, "x")
    s.array(MACROS[:4], 2, 2)
    s.array(MACROS[2:], 1, 4, pitch=130)
    s.mirror(MACROS, "y")
    s.push(MACROS[:2])
    s.shift(["m3"], -6.0, 8.0)
    s.set_orientation("m4", "W")


def test_each_action_is_one_step_undo_redo_bit_exact(g):
    d, s = g
    states = [_state(s.floorplan)]
    calls = []

    class Rec:  # runs each action on the session and records the state after it
        def __getattr__(self, op):
            def f(*a, **k):
                getattr(s, op)(*a, **k)
                calls.append(op)
                states.append(_state(s.floorplan))
            return f

    _all_actions(Rec())
    assert s.history == calls and len(calls) == 8
    assert all(not _same(a, b) for a, b in zip(states, states[1:]))
    for k in range(len(calls), 0, -1):
        s.undo()
        assert _same(_state(s.floorplan), states[k - 1])
    for k in range(1, len(calls) + 1):
        s.redo()
        assert _same(_state(s.floorplan), states[k])


def test_script_and_session_file_replay_arrangements_exactly(tmp_path, demo_path):
    d = fw.load(demo_path)
    s = Session(d)
    names = [f"sram_sp2k_{i}" for i in range(6)]
    for k, nm in enumerate(names):
        s.move(nm, 200.0 + 173.3 * k, 900.0 - 77.7 * k)
    s.align(names[:3], "y_centre")
    s.distribute(names, "x")
    s.array(names, 2, 3, pitch=(160.5, 130.0))
    s.mirror(names, "x")
    s.push(names)
    s.shift(names[:2], 3.3, -7.1)
    s.set_orientation(names[0], "FE")
    s.undo()
    code = s.script()
    out = tmp_path / "replayed.npy"
    path = tmp_path / "replay.py"
    path.write_text(code + "\nimport numpy as _np\n_fp = session.floorplan\n"
                    f"_np.save({str(out)!r}, _np.concatenate([_fp.x, _fp.y, _fp.orient, "
                    "_fp.status]))\n")
    r = subprocess.run([sys.executable, str(path)], capture_output=True, text=True,
                       cwd=tmp_path, timeout=120)
    assert r.returncode == 0, r.stderr[-2000:]
    fp = s.floorplan
    want = np.concatenate([fp.x, fp.y, fp.orient, fp.status])
    assert np.array_equal(np.load(out).view(np.uint8), want.view(np.uint8))
    # the session file keeps the log and the history: undo continues where it was
    s.save(tmp_path / "s.json")
    s2 = Session.load(tmp_path / "s.json", design=d)
    assert s2.log == s.log and s2.history == s.history
    s.undo()
    s2.undo()
    assert _same(_state(s2.floorplan), _state(s.floorplan))


def test_arrange_functions_do_not_touch_their_input(g):
    d, s = g
    fp = s.floorplan.copy()
    before = _state(fp)
    idx = [d.block(n) for n in MACROS]
    for res in (arrange.align(d, fp, idx, "top"), arrange.distribute(d, fp, idx, "y"),
                arrange.array(d, fp, idx, 3, 2), arrange.mirror(d, fp, idx, "x"),
                arrange.push(d, fp, idx, "left"), arrange.shift(d, fp, idx, 1.0, 1.0)):
        assert _same(_state(fp), before)
        new = res.apply(fp)
        assert np.array_equal(new.x[res.idx], res.x)
