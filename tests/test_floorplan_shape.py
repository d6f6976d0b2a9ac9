"""Floorplan-shape figures: narrow channels, macros facing a wall, logic regions.

Outside references: shapely (GEOS) for rectangle geometry, distances, unions and differences;
the LEF/DEF language reference's definitions of the eight orientations for the facing rule.
"""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import box

from floorwidget import metrics as M
from floorwidget.design import MACRO, ORIENT_CODE, ORIENTATIONS, Design, Floorplan
from floorwidget.metrics import shape as shape_mod
from floorwidget.metrics.shape import _SIDES as SIDES


def macro_design(sizes, pins=None, core=(0.0, 0.0, 40.0, 30.0), halo=None, blockages=None,
                 row_height=1.0):
    """Macros of ``sizes`` [(w, h)] in a core of rows ``row_height`` high; ``pins`` is a list of
    (macro, dx, dy) put on one net each with a pin of macro 0 at its centre (or none)."""
    n = len(sizes)
    nrows = int(round((core[3] - core[1]) / row_height))
    rows = {"x": np.full(nrows, core[0]), "y": core[1] + row_height * np.arange(nrows),
            "height": np.full(nrows, row_height), "site_width": np.full(nrows, 0.25),
            "num_sites": np.full(nrows, int(round((core[2] - core[0]) / 0.25)))}
    pins = pins or []
    start = np.arange(0, 2 * len(pins) + 1, 2)
    pb = [b for (m, _, _) in pins for b in (m, (m + 1) % n)]
    dx = [v for (_, x, _) in pins for v in (x, 0.0)]
    dy = [v for (_, _, y) in pins for v in (y, 0.0)]
    hl = np.zeros((n, 4)) if halo is None else np.asarray(halo, float).reshape(n, 4)
    return Design("shape", core, [f"m{i}" for i in range(n)], [MACRO] * n,
                  [s[0] for s in sizes], [s[1] for s in sizes], start, pb, dx, dy, halo=hl,
                  rows=rows, blockages=blockages, grid_pitch=(0.25, 1.0))


# --------------------------------------------------------------------------------------------
# narrow channels against shapely


@st.composite
def macro_sets(draw):
    n = draw(st.integers(2, 7))
    xs = [draw(st.integers(0, 36)) for _ in range(n)]
    ys = [draw(st.integers(0, 26)) for _ in range(n)]
    ws = [draw(st.integers(1, 40 - x)) for x in xs]
    hs = [draw(st.integers(1, 30 - y)) for y in ys]
    halo = [[draw(st.integers(0, 2)) for _ in range(4)] for _ in range(n)]
    channel = draw(st.sampled_from([0.0, 2.5, 4.0, 9.0, 30.0]))
    return xs, ys, ws, hs, halo, channel


def shapely_narrow(foot, halo_box, channel):
    """Narrow pairs by shapely alone: the two footprints' projections on one axis overlap by a
    positive length (the intersection of their slabs has area); the strip is the part of the
    convex hull of both inside the common slab, minus both; a third footprint meeting the strip
    in a positive area stands between them; halo boxes that intersect (touch or overlap) mean
    the pair is abutted; else the pair is narrow when their distance is below ``channel``."""
    out = set()
    big = 1e4
    n = len(foot)
    for a in range(n):
        for b in range(a + 1, n):
            A, B = foot[a], foot[b]
            ax0, ay0, ax1, ay1 = A.bounds
            bx0, by0, bx1, by1 = B.bounds
            slabs = []
            if min(ax1, bx1) > max(ax0, bx0):  # common x span
                slabs.append(box(max(ax0, bx0), -big, min(ax1, bx1), big))
            if min(ay1, by1) > max(ay0, by0):  # common y span
                slabs.append(box(-big, max(ay0, by0), big, min(ay1, by1)))
            for slab in slabs:
                if A.intersects(B):
                    continue
                hull = shapely.union(A, B).convex_hull.intersection(slab)
                strip = hull.difference(A).difference(B)
                if strip.area <= 0:
                    continue
                if any(strip.intersection(foot[c]).area > 0 for c in range(n) if c not in (a, b)):
                    continue
                if halo_box[a].intersects(halo_box[b]):
                    continue
                if A.distance(B) < channel:
                    out.add((a, b))
    return out


@settings(max_examples=150, deadline=None)
@given(macro_sets())
def test_narrow_channels_match_shapely(case):
    xs, ys, ws, hs, halo, channel = case
    d = macro_design(list(zip(ws, hs)), halo=halo)
    fp = Floorplan(d, xs, ys)
    foot = [box(x, y, x + w, y + h) for x, y, w, h in zip(xs, ys, ws, hs)]
    hb = [box(x - h_[0], y - h_[1], x + w + h_[2], y + h + h_[3])
          for x, y, w, h, h_ in zip(xs, ys, ws, hs, halo)]
    got = M.channel_gaps(d, fp, channel)
    assert {tuple(p) for p in got.pairs.tolist()} == shapely_narrow(foot, hb, channel)
    assert M.narrow_channels(d, fp, channel) == len(got)
    for (a, b), gap, s in zip(got.pairs, got.gaps, got.strips):
        assert gap == pytest.approx(foot[a].distance(foot[b]))
        strip = box(*s)
        # the strip lies between the two: it touches both and overlaps neither
        assert strip.area > 0 and strip.touches(foot[a]) and strip.touches(foot[b])


def test_channel_hand_worked():
    # m0 and m1 side by side 3 µm apart with 1 µm halos facing: halos 2 µm in all, so open and
    # narrow below a 4 µm channel, wide at 3 µm; m2 abutted under m0 (halo boxes touch).
    d = macro_design([(10, 10), (10, 10), (10, 5)], halo=[[1, 1, 1, 1]] * 3)
    fp = Floorplan(d, [0, 13, 0], [10, 10, 3])
    ch = M.channel_gaps(d, fp, 4.0)
    assert ch.pairs.tolist() == [[0, 1]] and ch.gaps.tolist() == [3.0]
    assert ch.strips.tolist() == [[10.0, 10.0, 13.0, 20.0]] and ch.vertical.tolist() == [True]
    assert M.narrow_channels(d, fp, 3.0) == 0
    # a third macro filling the gap: the outer two no longer face each other
    d3 = macro_design([(10, 10), (10, 10), (3, 10)])
    assert M.narrow_channels(d3, Floorplan(d3, [0, 13, 10], [10, 10, 10]), 5.0) == 0
    assert M.narrow_channels(d3, Floorplan(d3, [0, 13, 10], [10, 10, 25]), 5.0) == 1


def test_channel_default_is_four_rows():
    d = macro_design([(10, 10), (10, 10)], core=(0, 0, 60, 30), row_height=2.0)
    assert M.default_channel(d) == 8.0
    fp = Floorplan(d, [0, 17], [0, 0])  # gap 7 < 8
    assert M.evaluate(d, fp)["narrow_channels"] == 1
    assert M.evaluate(d, fp, channel=7.0)["narrow_channels"] == 0


# --------------------------------------------------------------------------------------------
# facing a wall: hand-worked in the eight orientations

# A 20 x 10 macro (N) with its pins on its right side: pin offsets (+9, +1) and (+9, -3), so the
# centroid (+9, -1) is at u = 0.9, v = -0.2.  Where the pins go, by the LEF/DEF definitions:
# N = R0 keeps them right; S = R180 turns them left; W = R90 counter-clockwise turns right into
# top; E = R270 (90 clockwise) turns right into bottom; FN mirrors through the y axis: left;
# FS mirrors through the x axis: right; FW = W then mirrored through the y axis: top; FE = E then
# mirrored: bottom.
PIN_SIDE = {"N": "right", "S": "left", "W": "top", "E": "bottom",
            "FN": "left", "FS": "right", "FW": "top", "FE": "bottom"}


@pytest.mark.parametrize("orient", ORIENTATIONS)
@pytest.mark.parametrize("wall", ["left", "right", "bottom", "top"])
def test_facing_wall_eight_orientations(orient, wall):
    core = (0.0, 0.0, 100.0, 80.0)
    d = macro_design([(20, 10), (2, 2)], pins=[(0, 9.0, 1.0), (0, 9.0, -3.0)], core=core)
    o = ORIENT_CODE[orient]
    w, h = (10, 20) if orient in ("E", "W", "FE", "FW") else (20, 10)
    # the macro 2 µm from the wall, centred along it; the pinless macro 1 in the middle
    at = {"left": (2, 40 - h / 2), "right": (98 - w, 40 - h / 2),
          "bottom": (50 - w / 2, 2), "top": (50 - w / 2, 78 - h)}[wall]
    fp = Floorplan(d, [at[0], 49], [at[1], 39], [o, 0])
    sides = M.pin_side(d, fp)
    assert SIDES[sides[0]] == PIN_SIDE[orient] and sides[1] == -1  # no pins: no side
    assert SIDES[M.nearest_wall(d, fp)[0]] == wall
    expect = PIN_SIDE[orient] == wall
    assert M.facing_wall(d, fp).tolist() == ([0] if expect else [])
    assert M.evaluate(d, fp)["macros_facing_wall"] == int(expect)


def test_facing_wall_centroid_on_a_diagonal_or_centre_has_no_side():
    d = macro_design([(20, 10), (2, 2)], pins=[(0, 10.0, 5.0), (0, 0.0, 0.0)])
    # centroid (5, 2.5): u = v = 0.5, a diagonal: no side
    assert M.pin_side(d, Floorplan(d, [0, 30], [0, 20]))[0] == -1


# --------------------------------------------------------------------------------------------
# logic regions against shapely


@st.composite
def obstacle_sets(draw):
    n = draw(st.integers(0, 8))
    rects = []
    for _ in range(n):
        x0, y0 = draw(st.integers(-4, 78)), draw(st.integers(-4, 58))
        rects.append((x0 / 2, y0 / 2, (x0 + draw(st.integers(1, 30))) / 2,
                      (y0 + draw(st.integers(1, 30))) / 2))
    nb = draw(st.integers(0, 3))
    blk = []
    for _ in range(nb):
        x0, y0 = draw(st.integers(0, 78)), draw(st.integers(0, 58))
        blk.append((x0 / 2, y0 / 2, min(x0 + draw(st.integers(1, 12)), 80) / 2,
                    min(y0 + draw(st.integers(1, 60)), 60) / 2))  # inside the die
    halo = draw(st.sampled_from([0.0, 0.5, 1.0]))
    return rects, blk, halo


@pytest.mark.parametrize("exact", [True, False])
@settings(max_examples=80, deadline=None)
@given(case=obstacle_sets())
def test_logic_regions_match_shapely(case, exact):
    # the piece count, the areas and the largest share equal shapely's (unions and differences
    # of rectangles, GEOS): on the grid of the obstacles' edges, and on even pixels of a quarter
    # row (0.25 µm) too, since the edges here lie on a 0.5 µm grid
    with pytest.MonkeyPatch.context() as mp:
        if not exact:
            mp.setattr(shape_mod, "EXACT_MAX_CELLS", 0)
        check_regions(case, exact)


def check_regions(case, exact):
    rects, blk, halo = case
    core = (0.0, 0.0, 40.0, 30.0)
    sizes = [(r[2] - r[0], r[3] - r[1]) for r in rects] or [(1.0, 1.0)]
    xs = [r[0] for r in rects] or [-50.0]  # no macros: one far outside the core
    ys = [r[1] for r in rects] or [-50.0]
    d = macro_design(sizes, core=core, halo=np.full((len(sizes), 4), halo),
                     blockages=np.array(blk).reshape(-1, 4))
    fp = Floorplan(d, xs, ys)
    obs = [box(x - halo, y - halo, x + w + halo, y + h + halo)
           for x, y, (w, h) in zip(xs, ys, sizes)] + [box(*b) for b in blk]
    free = box(*core).difference(shapely.union_all(obs))
    pieces = [free] if free.geom_type == "Polygon" else list(getattr(free, "geoms", []))
    areas = sorted((p.area for p in pieces if p.area > 0), reverse=True)
    lr = M.logic_regions(d, fp)
    assert lr.exact == exact
    assert lr.count == sum(a > 4.0 for a in areas)      # larger than 2 x 2 rows (1 µm rows)
    assert lr.areas == pytest.approx(areas, abs=1e-9)
    total = sum(areas)
    assert lr.largest == pytest.approx(areas[0] / total if total else 0.0)


def test_logic_regions_off_grid_within_raster_tolerance(monkeypatch):
    # edges anywhere: exact on the edge grid; on even pixels the free area is within half a
    # pixel times the obstacles' perimeter (shapely for the reference)
    rng = np.random.default_rng(5)
    core = (0.0, 0.0, 40.0, 30.0)
    for _ in range(20):
        k = 5
        x, y = rng.uniform(-3, 38, k), rng.uniform(-3, 28, k)
        w, h = rng.uniform(0.3, 12, k), rng.uniform(0.3, 12, k)
        d = macro_design(list(zip(w, h)), core=core)
        free = box(*core).difference(shapely.union_all(
            [box(a, b, a + c, b + e) for a, b, c, e in zip(x, y, w, h)]))
        monkeypatch.setattr(shape_mod, "EXACT_MAX_CELLS", 2**20)
        lr = M.logic_regions(d, Floorplan(d, x, y))
        assert lr.exact and lr.areas.sum() == pytest.approx(free.area, rel=1e-9)
        monkeypatch.setattr(shape_mod, "EXACT_MAX_CELLS", 0)
        lr = M.logic_regions(d, Floorplan(d, x, y))
        tol = 0.5 * np.diff(lr.x_edges).max() * float(np.sum(2 * (w + h)))
        assert not lr.exact and lr.areas.sum() == pytest.approx(free.area, abs=tol)


def test_logic_regions_hand_worked():
    # a 4 x 30 macro from bottom to top at x = 10 cuts a 40 x 30 core in two: 26 x 30 = 780 on
    # the right, 10 x 30 on the left, where two overlapping macros (2.5 x 28.5 at (0, 1.5) and
    # 1.5 x 28.5 at (1.5, 0), sharing 1 x 27) cover 87 and wall off a 1.5 x 1.5 pocket in the
    # corner (2.25 µm² < 2 x 2 rows: free, but not a region)
    d = macro_design([(4, 30), (2.5, 28.5), (1.5, 28.5)], core=(0, 0, 40, 30))
    fp = Floorplan(d, [10, 0, 1.5], [0, 1.5, 0])
    lr = M.logic_regions(d, fp)
    left = 300.0 - (2.5 * 28.5 + 1.5 * 28.5 - 27.0) - 2.25
    assert lr.areas.tolist() == [780.0, left, 2.25] and lr.count == 2
    assert lr.largest == pytest.approx(780.0 / (780.0 + left + 2.25))


# --------------------------------------------------------------------------------------------
# macros on the periphery, against shapely


@settings(max_examples=100, deadline=None)
@given(macro_sets())
def test_periphery_macros_match_shapely(case):
    # against the boundary: the halo box is not properly inside the core (it touches or crosses
    # the boundary); abutted: halo boxes intersect and the footprints share a span on one axis
    xs, ys, ws, hs, halo, _ = case
    d = macro_design(list(zip(ws, hs)), halo=halo)
    fp = Floorplan(d, xs, ys)
    core = box(*d.core)
    foot = [box(x, y, x + w, y + h) for x, y, w, h in zip(xs, ys, ws, hs)]
    hb = [box(x - h_[0], y - h_[1], x + w + h_[2], y + h + h_[3])
          for x, y, w, h, h_ in zip(xs, ys, ws, hs, halo)]
    wall = [not core.contains_properly(h) for h in hb]

    def share_span(a, b):
        ax0, ay0, ax1, ay1 = foot[a].bounds
        bx0, by0, bx1, by1 = foot[b].bounds
        return min(ax1, bx1) > max(ax0, bx0) or min(ay1, by1) > max(ay0, by0)

    n = len(foot)
    want = [i for i in range(n) if wall[i] or any(
        wall[j] and hb[i].intersects(hb[j]) and share_span(i, j) for j in range(n) if j != i)]
    assert M.periphery_macros(d, fp).tolist() == want
