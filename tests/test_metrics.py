"""Metrics checked against hand arithmetic, shapely, the RUDY paper's identity and properties."""

from __future__ import annotations

import json

import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st

from floorwidget import metrics as M
from floorwidget.design import (
    CLUSTER,
    FIXED,
    MACRO,
    MOVABLE,
    ORIENT_CODE,
    PINNED,
    TERMINAL,
    Design,
    Floorplan,
)
from floorwidget.kernels.rects import overlap_area, overlap_pairs


def make_design(widths, heights, kinds, nets, die=(0.0, 0.0, 100.0, 100.0), halo=0.0,
                blockages=None, rows=None, grid_pitch=(1.0, 1.0), weights=None):
    """A design from plain lists; ``nets`` is a list of lists of (block, dx, dy)."""
    n = len(widths)
    start = np.cumsum([0] + [len(p) for p in nets])
    flat = [p for ps in nets for p in ps]
    return Design("t", die, [f"b{i}" for i in range(n)], kinds, widths, heights, start,
                  [p[0] for p in flat], [p[1] for p in flat], [p[2] for p in flat],
                  halo=np.full((n, 4), halo) if np.isscalar(halo) else halo,
                  blockages=blockages, rows=rows, grid_pitch=grid_pitch, net_weight=weights)


# --------------------------------------------------------------------------------------------
# HPWL by hand


def worked_example(orient_b="W"):
    # A: macro 20 x 10 at (10, 10), N: centre (20, 15); pin (+8, -3) -> (28, 12).
    # B: macro 20 x 10 placed at (50, 40) in orientation W (R90, counter-clockwise per the
    #    LEF/DEF language reference): footprint 10 x 20, centre (55, 50); the N offset (+8, -3)
    #    maps by (x, y) -> (-y, x) to (+3, +8): pin at (58, 58).
    # C: cluster 4 x 4 at (70, 20): centre (72, 22).   T: terminal at (0, 50).
    d = make_design([20, 20, 4, 0], [10, 10, 4, 0], [MACRO, MACRO, CLUSTER, TERMINAL],
                    [[(0, 8.0, -3.0), (1, 8.0, -3.0)],
                     [(1, 8.0, -3.0), (2, 0.0, 0.0), (3, 0.0, 0.0)],
                     [(0, 0.0, 0.0), (2, 0.0, 0.0)]],
                    weights=[1.0, 2.0, 1.0])
    fp = Floorplan(d, [10, 50, 70, 0], [10, 40, 20, 50],
                   [0, ORIENT_CODE[orient_b], 0, 0], [0, 0, 0, FIXED])
    return d, fp


def test_hpwl_worked_example():
    d, fp = worked_example()
    # net 0: x 28..58 = 30, y 12..58 = 46               -> 76
    # net 1: x 0..72 = 72 (terminal, B pin, C), y 22..58 -> 72 + 36 = 108
    # net 2: A centre (20, 15), C centre (72, 22)        -> 52 + 7 = 59
    np.testing.assert_allclose(M.net_hpwl(d, fp), [76.0, 108.0, 59.0])
    assert M.hpwl(d, fp) == pytest.approx(243.0)
    assert M.hpwl(d, fp, weighted=True) == pytest.approx(76 + 2 * 108 + 59)


@pytest.mark.parametrize("orient, pin", [
    # B's pin for each orientation, from the LEF/DEF reference definitions applied by hand to
    # the N offset (+8, -3) about the centre: footprint 10 x 20 when rotated by 90 degrees.
    ("N", (60 + 8, 45 - 3)),    # R0, footprint 20 x 10 at (50, 40): centre (60, 45)
    ("S", (60 - 8, 45 + 3)),    # R180: (x, y) -> (-x, -y)
    ("W", (55 + 3, 50 + 8)),    # R90:  (x, y) -> (-y, x)
    ("E", (55 - 3, 50 - 8)),    # R270: (x, y) -> (y, -x)
    ("FN", (60 - 8, 45 - 3)),   # mirror about the y axis: (x, y) -> (-x, y)
    ("FS", (60 + 8, 45 + 3)),   # mirror about the x axis: (x, y) -> (x, -y)
    ("FW", (55 - 3, 50 + 8)),   # R90 then mirror about the y axis: (x, y) -> (y, x)
    ("FE", (55 + 3, 50 - 8)),   # R270 then mirror about the y axis: (x, y) -> (-y, -x)
])
def test_hpwl_orientations(orient, pin):
    d, fp = worked_example(orient)
    bx, by = pin
    expect0 = abs(bx - 28) + abs(by - 12)                 # net 0: A pin (28, 12) to B pin
    expect1 = (max(bx, 72) - 0) + (max(by, 22, 50) - min(by, 22, 50))
    np.testing.assert_allclose(M.net_hpwl(d, fp)[:2], [expect0, expect1])


def test_nets_hpwl_subset_matches(demo_design):
    d = demo_design
    rng = np.random.default_rng(1)
    fp = d.initial.copy()
    fp.x += rng.uniform(-500, 500, d.num_blocks)
    fp.y += rng.uniform(-500, 500, d.num_blocks)
    fp.orient[d.kind == MACRO] = rng.integers(0, 8, int((d.kind == MACRO).sum()))
    px, py = M.pin_positions(d, fp)          # the fast path agrees with the Floorplan method
    qx, qy = fp.pin_positions()
    assert np.array_equal(px, qx) and np.array_equal(py, qy)
    full = M.net_hpwl(d, fp)
    nets = d.nets_of([d.block(d.macros[3])])
    np.testing.assert_allclose(M.nets_hpwl(d, fp, nets), full[nets])
    pick = rng.permutation(d.num_nets)[:50]
    np.testing.assert_allclose(M.nets_hpwl(d, fp, pick), full[pick])
    assert M.nets_hpwl(d, fp, []).shape == (0,)


# --------------------------------------------------------------------------------------------
# bins and density against shapely (S. Gillies et al., shapely 2.x: box, intersection, area)


def test_bin_grid_rule(demo_design):
    g = M.bin_grid(demo_design)
    c = demo_design.core
    assert g.nx <= M.MAX_BINS and g.ny <= M.MAX_BINS
    assert g.xhi == pytest.approx(c[2]) and g.yhi == pytest.approx(c[3])
    # the 4-row default (7.2 µm) would give more than MAX_BINS bins over 2360 µm: bounded
    assert g.bw >= (c[2] - c[0]) / M.MAX_BINS - 1e-9
    small = M.bin_grid(demo_design, 100.0)
    assert small.nx == round((c[2] - c[0]) / 100.0)
    with pytest.raises(ValueError):
        M.bin_grid(demo_design, -1.0)


def shapely_bin_areas(grid, rects):
    ex, ey = grid.x_edges(), grid.y_edges()
    out = np.zeros(grid.shape)
    boxes = shapely.box(rects[:, 0], rects[:, 1], rects[:, 2], rects[:, 3])
    for i in range(grid.nx):
        for j in range(grid.ny):
            out[i, j] = shapely.area(shapely.intersection(
                boxes, shapely.box(ex[i], ey[j], ex[i + 1], ey[j + 1]))).sum()
    return out


def random_rects(rng, k, lo=-10.0, hi=110.0, size=30.0):
    x0 = rng.uniform(lo, hi, k)
    y0 = rng.uniform(lo, hi, k)
    return np.stack([x0, y0, x0 + rng.uniform(0.1, size, k), y0 + rng.uniform(0.1, size, k)], 1)


@pytest.mark.parametrize("k", [5, 300])   # both code paths: outer products and running sums
def test_rect_area_map_matches_shapely(k):
    rng = np.random.default_rng(k)
    grid = M.BinGrid(3.0, 5.0, 9, 7, 10.5, 12.0)
    rects = random_rects(rng, k)
    np.testing.assert_allclose(M.rect_area_map(grid, rects), shapely_bin_areas(grid, rects),
                               rtol=1e-9, atol=1e-8)


def test_density_map_matches_shapely():
    rng = np.random.default_rng(3)
    k = 80
    r = random_rects(rng, k, 0.0, 90.0, 15.0)
    status = rng.integers(0, 3, k)
    kinds = np.where(rng.random(k) < 0.3, MACRO, CLUSTER)
    kinds[:3] = TERMINAL
    # the third blockage reaches past the core (5..95), not past the die
    blk = np.array([[10.0, 10.0, 40.0, 30.0], [30.0, 20.0, 50.0, 60.0], [92.0, 92.0, 100.0, 99.0]])
    rows = {"x": [5.0] * 45, "y": 5.0 + 2.0 * np.arange(45), "height": [2.0] * 45,
            "site_width": [0.5] * 45, "num_sites": [180] * 45}
    d = make_design(r[:, 2] - r[:, 0], r[:, 3] - r[:, 1], kinds, [[(0, 0, 0), (1, 0, 0)]],
                    die=(0, 0, 100, 100), blockages=blk, rows=rows)
    fp = Floorplan(d, r[:, 0], r[:, 1], None, status)
    grid = M.BinGrid(5.0, 5.0, 6, 6, 15.0, 15.0)   # the core 5..95 x 5..95
    dm = M.density_map(d, fp, grid)
    sized = kinds != TERMINAL
    core = shapely.box(5, 5, 95, 95)
    clip = shapely.intersection(shapely.box(*r.T), core)
    mov = sized & (status == MOVABLE)
    fix = sized & (status != MOVABLE)
    np.testing.assert_allclose(dm.movable, shapely_bin_areas(grid, r[mov]), atol=1e-8)
    np.testing.assert_allclose(dm.fixed, shapely_bin_areas(grid, r[fix]), atol=1e-8)
    # blockages overlap each other: the union counts once
    union = shapely.intersection(shapely.unary_union(shapely.box(*blk.T)), core)
    ex, ey = grid.x_edges(), grid.y_edges()
    expect_bl = np.array([[shapely.area(shapely.intersection(
        union, shapely.box(ex[i], ey[j], ex[i + 1], ey[j + 1]))) for j in range(6)]
        for i in range(6)])
    np.testing.assert_allclose(dm.blockage, expect_bl, atol=1e-8)
    np.testing.assert_allclose(dm.free, grid.bin_area - expect_bl, atol=1e-8)
    total_mov = float(shapely.area(shapely.box(*r[mov].T)).sum())
    assert dm.total_movable == pytest.approx(total_mov)
    assert dm.movable_outside == pytest.approx(total_mov - shapely.area(clip[mov]).sum(), abs=1e-7)
    # overflow by the definition, recomputed from the shapely maps
    t = 0.7
    excess = np.maximum(0, dm.movable + dm.fixed - t * (grid.bin_area - expect_bl)).sum()
    assert dm.overflow(t) == pytest.approx((excess + dm.movable_outside) / total_mov)
    assert M.density_overflow(d, fp, t, grid) == pytest.approx(dm.overflow(t))
    assert M.peak_density(d, fp, grid) == pytest.approx(
        ((dm.movable + dm.fixed) / grid.bin_area).max())
    # a grid reaching past the core: utilisation is per bin area *inside* the core
    g2 = M.BinGrid(0.0, 0.0, 5, 5, 20.0, 20.0)
    dm2 = M.density_map(d, fp, g2)
    core_in = shapely_bin_areas(g2, np.array([[5.0, 5.0, 95.0, 95.0]]))
    np.testing.assert_allclose(dm2.core, core_in, atol=1e-8)
    np.testing.assert_allclose(dm2.utilisation, (dm2.movable + dm2.fixed) / core_in)


# --------------------------------------------------------------------------------------------
# overflow properties (follow from the definition in design.md)


@st.composite
def non_overlapping(draw):
    """Blocks each inside its own cell of a 5 x 5 lattice over a 100 x 100 core."""
    cells = draw(st.lists(st.integers(0, 24), min_size=1, max_size=25, unique=True))
    fr = draw(st.lists(st.tuples(*[st.floats(0.0, 1.0)] * 4), min_size=len(cells),
                       max_size=len(cells)))
    x, y, w, h = [], [], [], []
    for c, (a, b, cw, ch) in zip(cells, fr):
        ww, hh = 1.0 + 18.0 * cw, 1.0 + 18.0 * ch
        x.append(20.0 * (c % 5) + (20.0 - ww) * a)
        y.append(20.0 * (c // 5) + (20.0 - hh) * b)
        w.append(ww)
        h.append(hh)
    return np.array(x), np.array(y), np.array(w), np.array(h)


@settings(max_examples=40, deadline=None)
@given(non_overlapping(), st.floats(1.0, 3.0), st.floats(3.0, 40.0))
def test_overflow_zero_without_overlap(blocks, target, bin_size):
    x, y, w, h = blocks
    n = len(x)
    d = make_design(w, h, [CLUSTER] * n, [[(0, 0, 0), (n - 1, 0, 0)]] if n > 1 else [])
    fp = Floorplan(d, x, y)
    assert M.density_overflow(d, fp, target, M.bin_grid(d, bin_size)) == pytest.approx(0.0,
                                                                                        abs=1e-9)


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 10_000), st.floats(0.05, 1.5), st.floats(0.05, 1.5))
def test_overflow_monotone_in_target(seed, t1, t2):
    rng = np.random.default_rng(seed)
    r = random_rects(rng, 60, 0.0, 80.0, 25.0)
    d = make_design(r[:, 2] - r[:, 0], r[:, 3] - r[:, 1], [CLUSTER] * 60,
                    [[(0, 0, 0), (1, 0, 0)]], blockages=[[20, 20, 45, 70]])
    fp = Floorplan(d, r[:, 0], r[:, 1], None, rng.integers(0, 2, 60))
    grid = M.bin_grid(d, 10.0)
    lo, hi = sorted((t1, t2))
    assert M.density_overflow(d, fp, lo, grid) >= M.density_overflow(d, fp, hi, grid) - 1e-12


# --------------------------------------------------------------------------------------------
# RUDY (Spindler and Johannes, DATE 2007)


def test_rudy_total_equals_hpwl():
    # Integrating the density (w + h) / (w h) over a w x h box gives w + h: over a map whose
    # bins hold every box, the total demand equals the total HPWL.
    rng = np.random.default_rng(5)
    nb = 200
    w = rng.uniform(0.5, 4.0, nb)
    nets = [[(int(a), 0.0, 0.0) for a in rng.choice(nb, size=int(rng.integers(2, 6)),
                                                     replace=False)] for _ in range(150)]
    d = make_design(w, w, [CLUSTER] * nb, nets)
    fp = Floorplan(d, rng.uniform(10, 85, nb), rng.uniform(10, 85, nb))
    grid = M.bin_grid(d, 7.0)
    rudy = M.rudy_map(d, fp, grid)
    per = M.net_hpwl(d, fp)
    assert rudy.sum() * grid.bin_area == pytest.approx(per.sum(), rel=1e-9)
    # a single box covering whole bins has exactly the paper's density in them
    d1 = make_design([1, 1], [1, 1], [CLUSTER, CLUSTER], [[(0, 0, 0), (1, 0, 0)]])
    fp1 = Floorplan(d1, [19.5, 59.5], [9.5, 29.5])    # centres (20, 10) and (60, 30): 40 x 20
    g1 = M.BinGrid(0.0, 0.0, 10, 10, 10.0, 10.0)
    r1 = M.rudy_map(d1, fp1, g1)
    np.testing.assert_allclose(r1[2:6, 1:3], (40 + 20) / (40 * 20))
    assert r1.sum() - r1[2:6, 1:3].sum() == pytest.approx(0.0)
    peak, p99 = M.congestion_stats(rudy)
    assert peak == pytest.approx(rudy.max()) and p99 == pytest.approx(np.percentile(rudy, 99))


def test_rudy_degenerate_box_keeps_demand():
    # a horizontal two-pin net (zero height) is widened to one bin tall; its demand stays w
    d = make_design([1, 1], [1, 1], [CLUSTER, CLUSTER], [[(0, 0, 0), (1, 0, 0)]])
    fp = Floorplan(d, [9.5, 49.5], [44.5, 44.5])
    g = M.BinGrid(0.0, 0.0, 10, 10, 10.0, 10.0)
    r = M.rudy_map(d, fp, g)
    assert r.sum() * g.bin_area == pytest.approx(40.0)
    assert (r > 0).sum() == 4              # box 10..50 x 40..50 after widening: four bins
    assert np.all(np.isfinite(r))


# --------------------------------------------------------------------------------------------
# legality


def test_macro_overlaps_match_shapely():
    rng = np.random.default_rng(11)
    n = 40
    w, h = rng.uniform(3, 15, n), rng.uniform(3, 15, n)
    halo = rng.uniform(0, 2, (n, 4))
    d = make_design(w, h, [MACRO] * n, [[(0, 0, 0), (1, 0, 0)]], die=(0, 0, 200, 200),
                    halo=halo)
    fp = Floorplan(d, rng.uniform(0, 150, n), rng.uniform(0, 150, n), None,
                   rng.choice([MOVABLE, PINNED, FIXED], n))
    leg = M.legality(d, fp)
    # the halo rule (common practice): a footprint may not enter another macro's halo box;
    # halo boxes may overlap each other.  Per pair, the area of the union of the two
    # footprint-against-halo-box intersections (shapely/GEOS).
    boxes = shapely.box(*fp.rects(halo=True).T)
    feet = shapely.box(*fp.rects().T)
    expect = {}
    for a in range(n):
        for b in range(a + 1, n):
            inter = shapely.union(shapely.intersection(feet[a], boxes[b]),
                                  shapely.intersection(feet[b], boxes[a]))
            if inter.area > 0:
                expect[(a, b)] = inter.area
    assert any(shapely.area(shapely.intersection(boxes[a], boxes[b])) > 0
               for a in range(n) for b in range(a + 1, n) if (a, b) not in expect)
    got = {tuple(p): ar for p, ar in zip(leg["overlap_pairs"].tolist(), leg["overlap_areas"])}
    assert set(got) == set(expect)
    for k in expect:
        assert got[k] == pytest.approx(expect[k])
    assert leg["macro_overlap_area"] == pytest.approx(sum(expect.values()))
    assert leg["macro_overlaps"] == len(expect) > 0
    assert not leg["legal"]


def test_legality_rules():
    # grid: origin = core lower-left (0, 0), pitch (1, 1); die 0..100
    d = make_design([10, 10, 10, 10, 2], [10, 10, 10, 10, 2],
                    [MACRO, MACRO, MACRO, MACRO, CLUSTER], [[(0, 0, 0), (4, 0, 0)]],
                    halo=1.0, blockages=[[80, 80, 90, 90]])
    # m0 clean; m1 touches m0's halo edge-to-edge (apart by 2 = 1 + 1: legal);
    # m2 off grid; m3 on the blockage; cluster out of the die
    fp = Floorplan(d, [10, 22, 40.5, 75, 99.5], [10, 10, 10, 75, 50])
    leg = M.legality(d, fp)
    assert leg["macro_overlaps"] == 0
    assert leg["off_grid"].tolist() == [2]
    assert leg["on_blockage"].tolist() == [3]
    assert leg["out_of_die"].tolist() == [4]
    assert not leg["legal"]
    # halos may overlap each other: 1.5 apart, the halo boxes overlap but no footprint is
    # inside the other's halo box
    fp.x[:] = [10, 21.5, 40, 60, 50]
    assert M.legality(d, fp)["macro_overlaps"] == 0
    # 0.5 apart: each footprint is 0.5 deep in the other's 1 µm halo (0.5 x 10 each way)
    fp.x[:] = [10, 20.5, 40, 60, 50]
    leg = M.legality(d, fp)
    assert leg["overlap_pairs"].tolist() == [[0, 1]]
    assert leg["macro_overlap_area"] == pytest.approx(2 * 0.5 * 10)
    # a fixed macro off the grid is the input's business; overlaps with it still count
    fp.x[:] = [10, 25, 40.5, 60, 50]
    fp.status[2] = FIXED
    leg = M.legality(d, fp)
    assert leg["legal"]
    fp.x[1] = 35.0
    assert M.legality(d, fp)["overlap_pairs"].tolist() == [[1, 2]]


def test_halo_rule_hand_worked_areas():
    # the halo rule (common practice): no other macro's footprint inside a halo box
    d = make_design([10, 10], [10, 10], [MACRO, MACRO], [[(0, 0, 0), (1, 0, 0)]],
                    halo=np.array([[0.0, 0.0, 5.0, 0.0], [0.0, 0.0, 0.0, 0.0]]))
    # m1 2 µm right of m0, whose right halo is 5: m1's footprint x 22..32, y 12..22 meets
    # m0's halo box x 10..25, y 10..20 in 3 x 8 = 24 µm²
    fp = Floorplan(d, [10.0, 22.0], [10.0, 12.0])
    leg = M.legality(d, fp)
    assert leg["overlap_pairs"].tolist() == [[0, 1]] and not leg["legal"]
    assert leg["macro_overlap_area"] == pytest.approx(24.0)
    # mirrored (m1 left of m0, facing m0's halo-free left side) at the same gap: legal
    fp = Floorplan(d, [22.0, 10.0], [10.0, 12.0])
    assert M.legality(d, fp)["macro_overlaps"] == 0
    # overlapping footprints with 1 µm halos all round: m0 at 10..20, m1 at 15..25 (y 10..20);
    # the union of the two footprint-in-halo regions is x 14..21 by y 10..20 = 70 µm², the
    # footprints' own overlap (50 µm²) counted once
    d = make_design([10, 10], [10, 10], [MACRO, MACRO], [[(0, 0, 0), (1, 0, 0)]], halo=1.0)
    leg = M.legality(d, Floorplan(d, [10.0, 15.0], [10.0, 10.0]))
    assert leg["macro_overlap_area"] == pytest.approx(70.0)


def test_fixed_pair_with_overlapping_halos_reads_legal_from_def(tmp_path):
    # two fixed macros 4 µm apart with 2 µm halos all round (their halo boxes overlap, neither
    # footprint enters the other's halo): legal, and the DEF '+ HALO' survives a round trip
    import floorwidget as fw

    d = make_design([20, 20], [10, 10], [MACRO, MACRO], [[(0, 0, 0), (1, 0, 0)]], halo=2.0)
    fp = Floorplan(d, [10.0, 34.0], [10.0, 10.0], None, [FIXED, FIXED])
    assert M.legality(d, fp)["legal"]
    fw.save(d, fp, tmp_path / "pair.def")
    back = fw.load(tmp_path / "pair.def")
    assert back.halo.tolist() == d.halo.tolist()
    leg = M.legality(back, back.initial)
    assert leg["legal"] and leg["macro_overlaps"] == 0


def test_evaluate_report_keys(demo_design):
    rep = M.evaluate(demo_design, demo_design.initial)
    assert tuple(rep) == M.REPORT_KEYS
    assert json.loads(json.dumps(rep)) == rep
    assert {type(v) for v in rep.values()} <= {float, int, bool, str}
    assert rep["num_blocks"] == demo_design.num_blocks
    assert rep["hpwl"] == pytest.approx(M.hpwl(demo_design, demo_design.initial))
    # every movable block starts at the core centre: a pile-up, so not legal and overflowing
    assert rep["macro_overlaps"] > 0 and not rep["legal"] and rep["density_overflow"] > 0.5


def test_overlap_broad_phase_matches_all_pairs():
    # the sort-based broad phase finds exactly the pairs an all-pairs test finds
    rng = np.random.default_rng(13)
    n = 800
    x0 = rng.uniform(0, 1000, n)
    x0[:100] = 500.0                      # a column of equal left edges, and exact touches
    y0 = rng.uniform(0, 1000, n)
    r = np.stack([x0, y0, x0 + rng.uniform(1, 40, n), y0 + rng.uniform(1, 40, n)], 1)
    # rectangles whose left edge is another's right edge, same rows: touching only
    r[100:110] = np.stack([r[90:100, 2], r[90:100, 1], r[90:100, 2] + 10, r[90:100, 3]], 1)
    a, b = overlap_pairs(r, tol=M.TOL)
    ox = np.minimum(r[:, None, 2], r[None, :, 2]) - np.maximum(r[:, None, 0], r[None, :, 0])
    oy = np.minimum(r[:, None, 3], r[None, :, 3]) - np.maximum(r[:, None, 1], r[None, :, 1])
    hit = np.triu((ox > M.TOL) & (oy > M.TOL), 1)
    ea, eb = np.nonzero(hit)
    assert set(zip(a.tolist(), b.tolist())) == set(zip(ea.tolist(), eb.tolist()))
    np.testing.assert_allclose(np.sort(overlap_area(r[a], r[b])), np.sort((ox * oy)[hit]))


def test_default_bins_are_not_smaller_than_the_soft_clusters(demo_design):
    # A soft cluster stands for many standard cells whose area spreads over a region; on bins
    # smaller than the cluster it would count as a solid block of density 1 > target, an
    # overflow no placement can remove (common practice: bins of a few cluster/cell sizes).
    import numpy as np

    from floorwidget.design import CLUSTER
    from floorwidget.metrics import bin_grid

    g = bin_grid(demo_design)
    soft = demo_design.kind == CLUSTER
    median_side = np.median(np.sqrt(demo_design.width[soft] * demo_design.height[soft]))
    assert min(g.bw, g.bh) >= 1.9 * median_side


@pytest.mark.parametrize("seed", range(5))
def test_cell_overlap_counts_match_all_pairs(seed):
    # the banded sweep (cells) and the per-obstacle search (cells against macros/blockages)
    # count exactly the pairs that a brute-force all-pairs test of positive overlap finds
    from floorwidget.metrics.legality import _banded_overlaps, _cross_overlaps

    rng = np.random.default_rng(seed)
    n, m = 300, 5
    x = rng.uniform(0, 50, n)
    y = rng.integers(0, 10, n) * 2.0 + rng.choice([0.0, 0.0, 0.5], n)
    r = np.stack([x, y, x + rng.uniform(0.5, 4, n), y + rng.choice([2.0, 3.0], n)], 1)
    r[rng.random(n) < 0.2] = r[seed]  # copies on one spot count c(c-1)/2 pairs among them
    o0 = np.stack([rng.uniform(0, 50, m), rng.uniform(0, 20, m)], 1)
    ob = np.concatenate([o0, o0 + rng.uniform(1, 10, (m, 2))], 1)

    def brute(p, q):
        ox = np.minimum(p[:, None, 2], q[None, :, 2]) - np.maximum(p[:, None, 0], q[None, :, 0])
        oy = np.minimum(p[:, None, 3], q[None, :, 3]) - np.maximum(p[:, None, 1], q[None, :, 1])
        return (ox > 1e-6) & (oy > 1e-6)

    cc = brute(r, r)
    assert _banded_overlaps(r) == int(np.triu(cc, 1).sum())
    assert _cross_overlaps(r, ob) == int(brute(r, ob).sum())


def test_cells_all_on_one_spot_count_every_pair():
    # issue 23: an unplaced floorplan (every cell at the origin) made the all-pairs count
    # O(n^2); copies now count as one rectangle with a multiplicity: n(n-1)/2 pairs
    from floorwidget.metrics.legality import _banded_overlaps

    n = 20000
    r = np.tile([0.0, 0.0, 1.0, 0.27], (n, 1))
    assert _banded_overlaps(r) == n * (n - 1) // 2
    r[::2, :2] += 5.0  # two apart stacks
    r[::2, 2:] += 5.0
    assert _banded_overlaps(r) == 2 * ((n // 2) * (n // 2 - 1) // 2)
