"""Synthetic designs: the Rent exponent they realise, their geometry, and the known optimum."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.sparse as sp

from floorwidget.design import CELL, FIXED, MACRO, MOVABLE, TERMINAL, Floorplan
from floorwidget.metrics import hpwl, net_hpwl
from floorwidget.synth import (
    hierarchy_bounds,
    known_optimum_design,
    net_lower_bound,
    rent_design,
)


def _mean_terminals(d, level: int) -> tuple[float, float]:
    """(mean block size, mean external terminals) over the blocks of one hierarchy level.

    A net is a terminal of a block when it has a pin inside and a pin outside it (pins on
    macros and I/O terminals count as outside every cell block).  Counted through a sparse
    net x block incidence matrix, independently of the generator's own code.
    """
    N = int((d.kind == CELL).sum())
    b = hierarchy_bounds(N, level)
    nb = len(b) - 1
    is_cell = d.pin_block < N
    blk = np.searchsorted(b, d.pin_block[is_cell], side="right") - 1
    inc = sp.csr_matrix((np.ones(is_cell.sum()), (d.pin_net[is_cell], blk)),
                        shape=(d.num_nets, nb))
    inc.sum_duplicates()
    inc.data[:] = 1.0
    outside = np.bincount(d.pin_net[~is_cell], minlength=d.num_nets) > 0
    spans = np.diff(inc.indptr)
    crossing = (spans >= 2) | outside
    term = np.asarray(inc[crossing].sum(axis=0)).ravel()
    return N / nb, float(term.mean())


@pytest.mark.parametrize("p", [0.5, 0.7])
def test_rent_exponent_is_the_requested_one(p):
    """Log-log fit of mean terminals against block size over the bisection hierarchy.

    Rent's rule T = t B^p: Landman, Russo, IEEE Trans. Computers 1971.  Tolerance ±0.1.
    """
    N = 2**13
    d = rent_design(N, rent_exponent=p, seed=7)
    levels = range(3, 11)                      # blocks of 1024 down to 8 cells
    pts = np.array([_mean_terminals(d, lv) for lv in levels])
    slope, _ = np.polyfit(np.log(pts[:, 0]), np.log(pts[:, 1]), 1)
    assert abs(slope - p) <= 0.1, (slope, pts.tolist())
    # and the two exponents are told apart: the measured slope is nearer its own p
    other = 1.2 - p
    assert abs(slope - p) < abs(slope - other)


def test_rent_design_sizes_geometry_and_validity():
    N, M = 6000, 12
    d = rent_design(N, num_macros=M, utilisation=0.6, avg_pins=4.0, seed=3)
    assert d.problems() == []
    kinds = np.bincount(d.kind, minlength=4)
    assert kinds[CELL] == N and kinds[MACRO] == M and kinds[TERMINAL] > 0
    # die fits the utilisation: placeable area / die area = 0.6 up to the rounding to rows
    area = float((d.width * d.height)[d.kind != TERMINAL].sum())
    die_area = (d.die[2] - d.die[0]) * (d.die[3] - d.die[1])
    assert 0.57 <= area / die_area <= 0.6 + 1e-9
    assert np.array_equal(d.core, d.die)
    # every cell has a pin; pins per cell near the request (macro and I/O nets add a few)
    cell_pins = np.bincount(d.pin_block, minlength=d.num_blocks)[d.kind == CELL]
    assert (cell_pins >= 1).all()
    assert 3.6 <= cell_pins.mean() <= 4.6
    assert (d.net_degree >= 2).all()
    # macro pins on an edge of their macro
    onmac = d.kind[d.pin_block] == MACRO
    b = d.pin_block[onmac]
    on_edge = np.isclose(np.abs(d.pin_dx[onmac]), d.width[b] / 2) | \
        np.isclose(np.abs(d.pin_dy[onmac]), d.height[b] / 2)
    assert on_edge.all() and onmac.sum() >= 8 * M
    # macros: whole rows high, whole sites wide
    mac = d.kind == MACRO
    assert np.allclose(d.height[mac] / d.grid_pitch[1], np.round(d.height[mac] / d.grid_pitch[1]))
    # terminals fixed on the die boundary; everything else movable
    fp = d.initial
    t = d.kind == TERMINAL
    x, y = fp.x[t], fp.y[t]
    on_boundary = np.isclose(x, d.die[0]) | np.isclose(x, d.die[2]) | \
        np.isclose(y, d.die[1]) | np.isclose(y, d.die[3])
    assert on_boundary.all()
    assert (fp.status[t] == FIXED).all() and (fp.status[~t] == MOVABLE).all()


def test_rent_terminal_count_follows_rent_at_the_top():
    """I/O count ≈ the block terminals extrapolated to the whole design, T(N) = T(B)(N/B)^p."""
    N, p = 2**13, 0.6
    d = rent_design(N, rent_exponent=p, seed=2)
    B, TB = _mean_terminals(d, 3)
    predicted = TB * (N / B) ** p
    io = int((d.kind == TERMINAL).sum())
    assert 0.75 * predicted <= io <= 1.35 * predicted


def test_rent_design_is_deterministic_for_a_seed():
    a = rent_design(3000, num_macros=3, seed=5)
    b = rent_design(3000, num_macros=3, seed=5)
    c = rent_design(3000, num_macros=3, seed=6)
    for attr in ("pin_block", "pin_dx", "net_start", "width", "height"):
        assert np.array_equal(getattr(a, attr), getattr(b, attr))
    assert not np.array_equal(a.pin_block[:1000], c.pin_block[:1000])


def test_net_lower_bound_against_brute_force():
    """min over a*b >= k of a + b - 2, by search, and the closed form ceil(2 sqrt k) - 2."""
    k = np.arange(1, 400)
    brute = np.array([min(a + math.ceil(kk / a) for a in range(1, kk + 1)) - 2 for kk in k])
    assert np.array_equal(net_lower_bound(k), brute)
    closed = np.array([math.ceil(2 * math.sqrt(kk) - 1e-12) - 2 for kk in k])
    assert np.array_equal(brute, closed)


def test_known_optimum_planted_placement_is_at_every_bound():
    """Each net of the planted placement sits at its own lower bound, so its HPWL is optimal.

    After Chang, Cong, Xie, ASP-DAC 2003 (from memory): the bound for k unit cells is
    ceil(2 sqrt k) - 2 (closed form above); a terminal on the edge wired to one cell: 0.5.
    """
    side = 24
    d, opt = known_optimum_design(side, seed=4)
    assert d.problems() == []
    N = side * side
    assert int((d.kind == CELL).sum()) == N
    assert np.array_equal(d.core, [0, 0, side, side]) and np.array_equal(d.die, d.core)
    fp = d.planted
    # legal: the cells fill the side x side unit slots one each (utilisation 1)
    cells = d.kind == CELL
    slots = fp.y[cells].astype(int) * side + fp.x[cells].astype(int)
    assert np.array_equal(np.sort(slots), np.arange(N))
    assert np.array_equal(fp.x[cells], np.round(fp.x[cells]))
    # every net at its bound
    has_terminal = np.bincount(d.pin_net[d.kind[d.pin_block] == TERMINAL],
                               minlength=d.num_nets) > 0
    deg = d.net_degree
    bound = np.where(has_terminal, 0.5,
                     np.array([math.ceil(2 * math.sqrt(k) - 1e-12) - 2 for k in deg]))
    assert np.array_equal(net_hpwl(d, fp), bound)
    assert hpwl(d, fp) == opt == bound.sum()
    assert has_terminal.sum() >= 4
    # the input placement: cells movable, stacked at the centre; terminals fixed on the edge
    init = d.initial
    assert (init.status[cells] == MOVABLE).all() and (init.status[~cells] == FIXED).all()
    assert np.ptp(init.x[cells]) == 0 and np.ptp(init.y[cells]) == 0
    assert np.array_equal(init.x[~cells], fp.x[~cells])


def test_no_legal_placement_beats_the_known_optimum():
    """Random swaps of the planted placement (still legal) never go below the optimum."""
    side = 16
    d, opt = known_optimum_design(side, seed=9)
    rng = np.random.default_rng(0)
    cells = np.flatnonzero(d.kind == CELL)
    base = d.planted
    worse = 0
    for _ in range(60):
        x, y = base.x.copy(), base.y.copy()
        a, b = rng.choice(cells, size=(2, 5), replace=False)
        x[a], x[b] = base.x[b], base.x[a]
        y[a], y[b] = base.y[b], base.y[a]
        fp = Floorplan(d, x, y, None, base.status)
        h = hpwl(d, fp)
        assert h >= opt
        worse += h > opt
    assert worse > 0
    # a fully random legal placement is far worse
    perm = rng.permutation(len(cells))
    x, y = base.x.copy(), base.y.copy()
    x[cells], y[cells] = base.x[cells][perm], base.y[cells][perm]
    assert hpwl(d, Floorplan(d, x, y, None, base.status)) > 2 * opt


def test_known_optimum_sizes_for_benchmarks():
    d, opt = known_optimum_design(100, seed=1)
    assert int((d.kind == CELL).sum()) == 10_000
    assert d.num_nets >= 10_000 and opt > 0
    assert d.planted.info["optimal_hpwl"] == opt
