"""The rectilinear polygon kernel against shapely (a reference library): the rectangles are
pairwise disjoint, their areas sum to the polygon's area (or the bounding box's minus it), and
their union is the polygon (or box minus polygon)."""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from shapely.geometry import Polygon, box

from floorwidget.kernels.polygon import polygon_rects


def _disjoint(r: np.ndarray) -> bool:
    """No two rectangles share area (sort by xlo and compare each with the ones starting
    before it ends; the inputs here are small)."""
    o = np.argsort(r[:, 0], kind="stable")
    r = r[o]
    for i in range(len(r)):
        j = i + 1 + np.flatnonzero(r[i + 1:, 0] < r[i, 2])
        ov = (np.minimum(r[i, 3], r[j, 3]) > np.maximum(r[i, 1], r[j, 1]))
        if ov.any():
            return False
    return True


def _check(pts, inside: bool) -> np.ndarray:
    r = polygon_rects(pts, inside)
    assert r.shape[1] == 4 and (r[:, 2] > r[:, 0]).all() and (r[:, 3] > r[:, 1]).all()
    assert _disjoint(r)
    poly = shapely.make_valid(Polygon(pts))
    want = poly if inside else box(*Polygon(pts).bounds).difference(poly)
    got = shapely.union_all([box(*b) for b in r]) if len(r) else Polygon()
    assert r[:, 2:].__sub__(r[:, :2]).prod(axis=1).sum() == pytest.approx(want.area, abs=1e-9)
    assert got.symmetric_difference(want).area == pytest.approx(0.0, abs=1e-9)
    return r


def test_l_shape_by_hand():
    pts = [(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)]
    assert _check(pts, True).tolist() == [[0, 0, 2, 1], [0, 1, 1, 2]]
    assert _check(pts, False).tolist() == [[1, 1, 2, 2]]
    # the same outline clockwise, with a repeated and a collinear vertex
    cw = [(0, 0), (0, 1), (0, 2), (1, 2), (1, 1), (2, 1), (2, 0), (2, 0)]
    assert sorted(map(tuple, polygon_rects(cw, True).tolist())) == [(0, 0, 1, 2), (1, 0, 2, 1)] \
        or sorted(map(tuple, polygon_rects(cw, True).tolist())) == [(0, 0, 2, 1), (0, 1, 1, 2)]


def test_degenerate_and_bad_outlines():
    assert polygon_rects([(0, 0), (5, 0), (5, 0), (0, 0)], True).shape == (0, 4)  # no area
    assert polygon_rects([(0, 0), (1, 1)], False).shape == (0, 4)
    with pytest.raises(ValueError, match="neither horizontal nor vertical"):
        polygon_rects([(0, 0), (4, 0), (0, 4)], True)
    with pytest.raises(ValueError, match="not finite"):
        polygon_rects([(0, 0), (np.nan, 0), (1, 1), (0, 1)], True)


@st.composite
def _outlines(draw):
    """Exterior of the union of random grid rectangles (a simple rectilinear polygon)."""
    k = draw(st.integers(1, 12))
    rects = []
    for _ in range(k):
        x0, y0 = draw(st.integers(0, 20)), draw(st.integers(0, 20))
        w, h = draw(st.integers(1, 10)), draw(st.integers(1, 10))
        rects.append(box(x0, y0, x0 + w, y0 + h))
    u = shapely.union_all(rects)
    polys = list(getattr(u, "geoms", [u]))
    p = max(polys, key=lambda g: g.area)
    return [tuple(c) for c in p.exterior.coords[:-1]]


@settings(max_examples=150, deadline=None)
@given(_outlines(), st.booleans())
def test_random_outlines_match_shapely(pts, inside):
    _check(pts, inside)


def _comb(h: np.ndarray) -> np.ndarray:
    """A comb: a base of height 1.5 from y = -1 and one tooth of width 1 and top ``h[t]`` at
    every even x, 4 * len(h) vertices."""
    teeth = len(h)
    pts = [(0.0, -1.0), (2.0 * teeth - 1, -1.0)]
    for t in range(teeth - 1, -1, -1):  # right to left over the tops and the gaps between
        pts += [(2.0 * t + 1, h[t]), (2.0 * t, h[t])]
        if t:
            pts += [(2.0 * t, 0.5), (2.0 * t - 1, 0.5)]
    return np.array(pts)


def test_large_comb_area_is_exact():
    # 10,000 teeth: 40,000 vertices; the area in closed form
    teeth = 10_000
    h = np.random.default_rng(0).integers(1, 1000, teeth).astype(float)
    pts = _comb(h)
    area = 1.5 * (2 * teeth - 1) + (h - 0.5).sum()
    assert len(pts) == 4 * teeth
    r = polygon_rects(pts, True)
    assert (r[:, 2:] - r[:, :2]).prod(axis=1).sum() == pytest.approx(area)
    assert len(r) < len(pts)  # O(n) rectangles
    out = polygon_rects(pts, False)
    bbox = (2 * teeth - 1) * (h.max() + 1)
    assert (out[:, 2:] - out[:, :2]).prod(axis=1).sum() == pytest.approx(bbox - area)
    assert Polygon(pts).area == pytest.approx(area)  # shapely agrees on the outline itself
