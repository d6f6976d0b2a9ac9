"""The rectangle kernel against brute force and shapely (GEOS unions and intersections)."""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from shapely.geometry import box

from floorwidget.kernels.rects import (
    TOL,
    clip,
    grow,
    halo_conflicts,
    overlap_pairs,
    union_area,
    union_rects,
)


def random_rects(rng, n, span=100.0, side=(1.0, 15.0), grid=0.5):
    # on a 0.5 µm grid so that equal edges (touching, shared left edges) occur often
    x = np.round(rng.uniform(0, span, n) / grid) * grid
    y = np.round(rng.uniform(0, span, n) / grid) * grid
    w = np.round(rng.uniform(*side, n) / grid) * grid
    h = np.round(rng.uniform(*side, n) / grid) * grid
    return np.stack([x, y, x + w, y + h], axis=1)


def brute(a, b, tol):
    ox = np.minimum(a[:, None, 2], b[None, :, 2]) - np.maximum(a[:, None, 0], b[None, :, 0])
    oy = np.minimum(a[:, None, 3], b[None, :, 3]) - np.maximum(a[:, None, 1], b[None, :, 1])
    return (ox > tol) & (oy > tol)


@pytest.mark.parametrize("seed", range(4))
@pytest.mark.parametrize("tol", [0.0, TOL, 0.75])
def test_overlap_pairs_equal_all_pairs(seed, tol):
    rng = np.random.default_rng(seed)
    a, b = random_rects(rng, 300), random_rects(rng, 120, side=(0.5, 40.0))
    a[:40, 0] = a[0, 0]  # a column of equal left edges
    a[:40, 2] = a[:40, 0] + 3.0
    i, j = overlap_pairs(a, b, tol)
    ei, ej = np.nonzero(brute(a, b, tol))
    assert list(zip(i.tolist(), j.tolist())) == list(zip(ei.tolist(), ej.tolist()))
    i, j = overlap_pairs(a, tol=tol)
    ei, ej = np.nonzero(np.triu(brute(a, a, tol), 1))
    assert list(zip(i.tolist(), j.tolist())) == list(zip(ei.tolist(), ej.tolist()))


def test_touching_rectangles_do_not_overlap():
    r = np.array([[0, 0, 10, 10], [10, 0, 20, 10], [0, 10, 10, 20], [10, 10, 20, 20.0]])
    assert len(overlap_pairs(r)[0]) == 0
    # shifted right by 0.1: each overlaps its own shift and that of its left neighbour
    i, j = overlap_pairs(r, r + [[0.1, 0, 0.1, 0]])
    assert list(zip(i.tolist(), j.tolist())) == [(0, 0), (1, 0), (1, 1), (2, 2), (3, 2), (3, 3)]


@pytest.mark.parametrize("seed", range(4))
def test_halo_conflicts_follow_the_rule_and_areas_equal_shapely(seed):
    # halo rule (common practice): a footprint inside another macro's halo box is a conflict;
    # halo boxes overlapping each other are not.  Area: the union of the two footprint-in-box
    # intersections, computed by shapely (GEOS).
    rng = np.random.default_rng(seed)
    foot = random_rects(rng, 80, span=120.0, side=(4.0, 20.0))
    halo = rng.choice([0.0, 0.5, 2.0], size=(80, 4))
    hb = grow(foot, halo)
    i, j, area = halo_conflicts(foot, hb, TOL)
    hit = brute(foot, hb, TOL)
    np.fill_diagonal(hit, False)
    want = np.triu(hit | hit.T, 1)
    ei, ej = np.nonzero(want)
    assert list(zip(i.tolist(), j.tolist())) == list(zip(ei.tolist(), ej.tolist()))
    for a, b, got in zip(i, j, area):
        fa, fb, ha, hb_ = box(*foot[a]), box(*foot[b]), box(*hb[a]), box(*hb[b])
        ref = fa.intersection(hb_).union(fb.intersection(ha)).area
        assert got == pytest.approx(ref, abs=1e-9)
    # halo boxes that overlap while no footprint enters the other's box: no conflict
    f2 = np.array([[0, 0, 10, 10], [13, 0, 23, 10.0]])
    assert len(halo_conflicts(f2, grow(f2, np.full((2, 4), 2.0)))[0]) == 0


@pytest.mark.parametrize("seed", range(4))
def test_union_equals_shapely(seed):
    rng = np.random.default_rng(seed)
    r = random_rects(rng, 60, span=50.0)
    ref = shapely.unary_union([box(*q) for q in r])
    assert union_area(r) == pytest.approx(ref.area, rel=1e-12)
    cells = union_rects(r)
    assert np.sum((cells[:, 2] - cells[:, 0]) * (cells[:, 3] - cells[:, 1])) == pytest.approx(
        ref.area, rel=1e-12)
    assert len(overlap_pairs(cells)[0]) == 0  # disjoint
    window = (10.0, 5.0, 40.0, 30.0)
    assert union_area(r, window) == pytest.approx(ref.intersection(box(*window)).area,
                                                  rel=1e-12)
    assert len(clip(r, window)) <= len(r)
    # beyond the exact limit: a lower bound (the largest single area), never more than exact
    assert union_area(r, max_rects=10) <= ref.area
    assert union_rects(r, max_edges=5) is not cells and len(union_rects(r, max_edges=5)) == 60
