"""Standard cells on rows: Abacus row legalisation, detailed placement, and the density-driven
spreading that keeps sparse designs compact.

Outside references: the optimum of the quadratic displacement problem with the cell order fixed
(the property the Abacus paper proves, Spindler, Schlichtmann, Johannes, ISPD 2008), computed
here with ``scipy.optimize.lsq_linear``; legality against shapely's polygon intersections.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import lsq_linear
from shapely import STRtree, box

from floorwidget import metrics
from floorwidget.design import CELL, FIXED, MACRO, MOVABLE, TERMINAL, Design
from floorwidget.placer import PlacerOptions, place
from floorwidget.placer.detail import detailed_place
from floorwidget.placer.rows import legalize_cells, row_segments
from floorwidget.synth import rent_design


def row_design(widths, xs, ys, *, rows=1, sites=400, site=1.0, row_h=10.0, macros=(),
               halo=0.0, blockages=None, nets=None, seed=0):
    """Cells (and fixed macros ``(x, y, w, h)``) over ``rows`` rows of ``sites`` sites."""
    nc = len(widths)
    nm = len(macros)
    W = list(widths) + [m[2] for m in macros] + [0.0]
    H = [row_h] * nc + [m[3] for m in macros] + [0.0]
    kind = [CELL] * nc + [MACRO] * nm + [TERMINAL]
    x = list(xs) + [m[0] for m in macros] + [0.0]
    y = list(ys) + [m[1] for m in macros] + [0.0]
    status = [MOVABLE] * nc + [FIXED] * nm + [FIXED]
    n = len(W)
    if nets is None:
        rng = np.random.default_rng(seed)
        nets = [list(rng.choice(n, size=int(rng.integers(2, 5)), replace=False))
                for _ in range(max(1, 2 * nc))]
        # and a few large nets (a clock, a reset), whose boxes the kernels update incrementally
        nets += [list(rng.choice(n, size=min(n, 60), replace=False)) for _ in range(3)]
    start = np.cumsum([0] + [len(p) for p in nets])
    pins = [b for p in nets for b in p]
    hl = np.zeros((n, 4))
    hl[nc:nc + nm] = halo
    core_w = sites * site
    return Design("rows", (0, 0, core_w, rows * row_h), [f"b{i}" for i in range(n)], kind, W, H,
                  start, pins, np.zeros(len(pins)), np.zeros(len(pins)), halo=hl,
                  rows={"x": np.zeros(rows), "y": row_h * np.arange(rows),
                        "height": np.full(rows, row_h), "site_width": np.full(rows, site),
                        "num_sites": np.full(rows, sites)},
                  blockages=blockages, x=x, y=y, status=status)


@pytest.mark.parametrize("seed", range(5))
def test_abacus_single_row_equals_quadratic_optimum_with_fixed_order(seed):
    # Spindler, Schlichtmann, Johannes, ISPD 2008: with the order fixed, the cluster positions
    # of Abacus minimise sum (x_i - x'_i)^2 subject to x_{i+1} >= x_i + w_i.  Written with gaps
    # g_k >= 0 (x_i = sum_{k<=i} g_k + sum_{k<i} w_k) this is a bounded linear least-squares
    # problem, solved by scipy.  The row is long enough that its right end does not bind.
    rng = np.random.default_rng(seed)
    n = 25
    site = 0.01
    w = rng.integers(100, 400, n) * site
    tx = np.sort(rng.uniform(2.0, 60.0, n))  # crowded: clusters form
    d = row_design(w, tx, np.full(n, 3.0), sites=20000, site=site, nets=[[0, 1]])
    out, info = legalize_cells(d, d.initial)
    A = np.tril(np.ones((n, n)))
    shift = np.concatenate([[0.0], np.cumsum(w)[:-1]])
    sol = lsq_linear(A, tx - shift, bounds=(0, np.inf), tol=1e-12)
    opt = A @ sol.x + shift
    got = out.x[:n]
    assert np.all(np.diff(got) >= w[:-1] - 1e-9)          # the order is kept, no overlap
    assert np.max(np.abs(got - opt)) <= 0.5 * site + 1e-6  # rounding to sites only
    assert np.all(out.y[:n] == 0.0)


def _shapely_check(d, fp, cells):
    """Independent legality: cells inside rows on sites, no overlap with each other, with the
    macros' halo boxes or with blockages (shapely intersection areas)."""
    r = fp.rects()
    rh = fp.rects(halo=True)
    geoms = [box(*r[i]) for i in cells]
    tree = STRtree(geoms)
    for k, g in enumerate(geoms):
        for j in tree.query(g):
            if j != k:
                assert g.intersection(geoms[j]).area <= 1e-9, (cells[k], cells[j])
    obs = [box(*rh[i]) for i in np.flatnonzero(d.kind == MACRO)]
    obs += [box(*b) for b in d.blockages]
    for g in geoms:
        for o in obs:
            assert g.intersection(o).area <= 1e-9
    ys = set(np.round(d.row_y, 9))
    for i in cells:
        assert round(fp.y[i], 9) in ys
        f = (fp.x[i] - d.row_x[0]) / d.row_site_width[0]
        assert abs(f - round(f)) < 1e-6
        assert fp.x[i] >= d.core[0] - 1e-9 and r[i, 2] <= d.core[2] + 1e-9


@pytest.mark.parametrize("seed", range(4))
def test_row_legalisation_is_legal_against_shapely(seed):
    rng = np.random.default_rng(seed)
    n = 300
    w = rng.integers(2, 9, n).astype(float)
    macros = [(40.0, 20.0, 60.0, 55.0), (150.0, 90.0, 33.0, 40.0)]
    bl = np.array([[250.0, 0.0, 270.0, 60.0]])
    d = row_design(w, rng.uniform(0, 390, n), rng.uniform(0, 190, n), rows=20, sites=400,
                   macros=macros, halo=3.0, blockages=bl, seed=seed)
    out, _ = legalize_cells(d, d.initial)
    cells = np.flatnonzero(d.kind == CELL)
    _shapely_check(d, out, cells)
    rep = metrics.evaluate(d, out)
    assert rep["cell_overlaps"] == rep["cells_off_row"] == rep["cells_off_site"] == 0
    # and the report sees an illegal input as such
    bad = metrics.evaluate(d, d.initial)
    assert bad["cells_off_row"] > 0 and not bad["legal"]


def test_row_segments_leave_out_halos_and_blockages():
    # one row of 100 sites; a macro body 20..30 with a 2 µm halo and a blockage 60..70:
    # free stretches [0, 18), [32, 60), [70, 100) worked by hand
    d = row_design([4.0], [0.0], [0.0], rows=1, sites=100, row_h=10.0,
                   macros=[(20.0, 0.0, 10.0, 10.0)], halo=2.0,
                   blockages=np.array([[60.0, 0.0, 70.0, 10.0]]), nets=[[0, 1]])
    seg = row_segments(d, d.initial)
    assert list(zip(seg.lo.tolist(), seg.hi.tolist())) == [(0, 18), (32, 60), (70, 100)]


@pytest.mark.parametrize("seed", range(3))
def test_detailed_placement_never_raises_hpwl_and_stays_legal(seed):
    # global moves and swaps are taken only on a strict gain (Pan, Viswanathan, Chu, ICCAD
    # 2005); the reported gain must equal the HPWL difference measured independently
    rng = np.random.default_rng(seed)
    n = 400
    w = rng.integers(2, 6, n).astype(float)
    d = row_design(w, rng.uniform(0, 390, n), rng.uniform(0, 190, n), rows=20, sites=400,
                   macros=[(100.0, 50.0, 50.0, 50.0)], halo=2.0, seed=seed)
    legal, _ = legalize_cells(d, d.initial)
    before = metrics.hpwl(d, legal)
    out, info = detailed_place(d, legal)
    after = metrics.hpwl(d, out)
    assert after <= before + 1e-9
    assert info["dp_gain"] == pytest.approx(before - after, rel=1e-6, abs=1e-6)
    assert info["dp_swaps"] > 0
    _shapely_check(d, out, np.flatnonzero(d.kind == CELL))


def test_place_puts_cells_on_rows_by_default_and_global_leaves_them():
    d = rent_design(1500, num_macros=3, seed=2)
    fp = place(d, seed=0)
    rep = metrics.evaluate(d, fp)
    assert rep["legal"] and rep["cells_off_row"] == 0 and rep["cell_overlaps"] == 0
    g = place(d, seed=0, cells="global")
    assert metrics.evaluate(d, g)["cells_off_row"] > 0


def test_sparse_design_stays_compact():
    # 15 % utilisation, every I/O terminal in one bus on the west edge: spreading must stop at
    # the density it spreads to (the field's spread_density, under the target), so the cells'
    # bounding box holds at most twice their area at that density (the acceptance
    # rule); spread over the whole core it would be 6.7 times their area
    d = rent_design(3000, utilisation=0.15, seed=3)
    fp0 = d.initial.copy()
    term = d.kind == TERMINAL
    h = d.die[3] - d.die[1]
    fp0.x[term] = d.die[0]
    fp0.y[term] = np.linspace(d.die[1] + 0.4 * h, d.die[1] + 0.6 * h, int(term.sum()))
    fp = place(d, fp0, target_density=0.8, seed=0)
    cells = d.kind == CELL
    r = fp.rects()[cells]
    bbox = (r[:, 2].max() - r[:, 0].min()) * (r[:, 3].max() - r[:, 1].min())
    area = float(np.sum(d.width[cells] * d.height[cells]))
    settle = min(PlacerOptions().spread_density, 0.8)
    assert bbox <= 2.0 * area / settle
    assert metrics.evaluate(d, fp)["legal"]


def test_design_without_fixed_pins_does_not_collapse():
    # no terminals at all: the spectral start (Hall, Management Science 17(3), 1970) must give a
    # placement that uses the core, not one point
    d = rent_design(800, seed=4, num_terminals=0)
    assert not (d.kind == TERMINAL).any()
    fp = place(d, seed=0, cells="global")
    cx, cy = fp.centres()
    span = d.core[2] - d.core[0]
    assert np.std(cx) > 0.1 * span and np.std(cy) > 0.1 * span
