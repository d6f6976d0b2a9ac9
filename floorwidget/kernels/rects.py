"""Axis-parallel rectangles: overlap pairs, the halo rule, unions.

One implementation of each rule for every layer that needs it (metrics, the macro legaliser,
the canvas and ``render``), so that the readout and the legaliser cannot disagree.  A
rectangle is a row ``xlo, ylo, xhi, yhi`` of a float ``(n, 4)`` array.

Two rectangles *overlap* when they share more than ``tol`` along both axes (with ``tol = 0``:
a positive area; touching rectangles never overlap).

The halo rule (common practice): a halo is a keep-out around one macro -- no standard cell and
no *other macro's footprint* inside it -- and halos may overlap each other.  Two macros
conflict when the footprint of one overlaps the halo box of the other.

Only numpy; nothing here knows designs or floorplans.
"""

from __future__ import annotations

import numpy as np

__all__ = ["TOL", "clip", "grow", "halo_conflicts", "overlap_area", "overlap_pairs",
           "union_area", "union_rects"]

#: Geometric tolerance of the report's checks, µm.
TOL = 1e-6


def _empty_pairs() -> tuple[np.ndarray, np.ndarray]:
    z = np.zeros(0, np.intp)
    return z, z.copy()


def _sweep(lo_a: np.ndarray, hi_a: np.ndarray, lo_b_sorted: np.ndarray, tol: float,
           side: str) -> tuple[np.ndarray, np.ndarray]:
    """For each ``a``, the run of sorted ``b`` whose left edge lies from ``lo_a`` (inclusive
    with ``side='left'``, exclusive with ``'right'``) up to ``hi_a - tol``: flat index pairs
    ``(a, position in the sorted b)``."""
    start = np.searchsorted(lo_b_sorted, lo_a, side=side)
    end = np.searchsorted(lo_b_sorted, hi_a - tol, side="left")
    cnt = np.maximum(end - start, 0)
    a = np.repeat(np.arange(len(lo_a)), cnt)
    first = np.cumsum(cnt) - cnt
    return a, start[a] + (np.arange(int(cnt.sum())) - first[a])


def _hits(ra: np.ndarray, rb: np.ndarray, tol: float) -> np.ndarray:
    """Whether row-aligned rectangle pairs overlap by more than ``tol`` along x and y."""
    ox = np.minimum(ra[:, 2], rb[:, 2]) - np.maximum(ra[:, 0], rb[:, 0])
    oy = np.minimum(ra[:, 3], rb[:, 3]) - np.maximum(ra[:, 1], rb[:, 1])
    return (ox > tol) & (oy > tol)


def overlap_pairs(a: np.ndarray, b: np.ndarray | None = None, tol: float = 0.0
                  ) -> tuple[np.ndarray, np.ndarray]:
    """Index pairs of overlapping rectangles, sorted by ``(i, j)``.

    Parameters
    ----------
    a : (n, 4) array
    b : (m, 4) array, optional
        Without it, pairs ``i < j`` within ``a``; with it, every pair ``(i, j)`` of a row of
        ``a`` and a row of ``b`` (an index may then appear on both sides, as when ``b`` holds
        the halo boxes of the footprints in ``a``).
    tol : float
        Overlap needed along each axis, µm; 0 means any positive overlap.

    Returns
    -------
    i, j : int arrays

    Notes
    -----
    Sort-based broad phase, O((n + m) log(n + m) + candidates).  With the rectangles sorted by
    left edge, the candidates of each one are those whose left edge lies within its own x span
    (``searchsorted``); they are generated and tested as flat arrays.  Candidates are
    O(n m) only when all rectangles share one x span.
    """
    a = np.asarray(a, np.float64).reshape(-1, 4)
    if b is None:
        n = len(a)
        if n < 2:
            return _empty_pairs()
        order = np.argsort(a[:, 0], kind="stable")
        rs = a[order]
        end = np.searchsorted(rs[:, 0], rs[:, 2] - tol, side="left")
        cnt = np.maximum(end - np.arange(n) - 1, 0)
        p = np.repeat(np.arange(n), cnt)
        first = np.cumsum(cnt) - cnt
        q = p + 1 + (np.arange(int(cnt.sum())) - first[p])
        hit = _hits(rs[p], rs[q], tol)
        i, j = order[p[hit]], order[q[hit]]
        i, j = np.minimum(i, j), np.maximum(i, j)
    else:
        b = np.asarray(b, np.float64).reshape(-1, 4)
        if not len(a) or not len(b):
            return _empty_pairs()
        oa = np.argsort(a[:, 0], kind="stable")
        ob = np.argsort(b[:, 0], kind="stable")
        sa, sb = a[oa], b[ob]
        # b starting within a's span (ties go here), then a starting strictly within b's span
        p1, q1 = _sweep(sa[:, 0], sa[:, 2], sb[:, 0], tol, "left")
        q2, p2 = _sweep(sb[:, 0], sb[:, 2], sa[:, 0], tol, "right")
        p, q = np.concatenate([p1, p2]), np.concatenate([q1, q2])
        hit = _hits(sa[p], sb[q], tol)
        i, j = oa[p[hit]], ob[q[hit]]
    o = np.lexsort((j, i))
    return i[o], j[o]


def overlap_area(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Area of the intersection of row-aligned rectangle pairs (0 where they are apart)."""
    wx = np.minimum(a[:, 2], b[:, 2]) - np.maximum(a[:, 0], b[:, 0])
    wy = np.minimum(a[:, 3], b[:, 3]) - np.maximum(a[:, 1], b[:, 1])
    return np.maximum(wx, 0.0) * np.maximum(wy, 0.0)


def halo_conflicts(foot: np.ndarray, halo_box: np.ndarray, tol: float = 0.0
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Pairs ``i < j`` of macros in conflict under the halo rule, and the area of each.

    A pair conflicts when the footprint of one overlaps the halo box of the other by more than
    ``tol`` along both axes (halo boxes may overlap each other).  Its area is that of the union
    of the two footprint-in-halo-box intersections,
    ``|f_i & h_j| + |f_j & h_i| - |f_i & f_j|``.

    Parameters
    ----------
    foot : (n, 4) array
        Footprints.
    halo_box : (n, 4) array
        The same macros' halo boxes (:func:`grow` of the footprints by the halos).
    tol : float
        0 (the legaliser: any positive overlap) or :data:`TOL` (the report).

    Returns
    -------
    i, j : int arrays, sorted by ``(i, j)``
    area : float array
    """
    foot = np.asarray(foot, np.float64).reshape(-1, 4)
    halo_box = np.asarray(halo_box, np.float64).reshape(-1, 4)
    # candidates: one sweep over each macro's hull of footprint and halo box (a pair in
    # conflict has overlapping hulls), then the rule itself on the candidates
    hull = np.concatenate([np.minimum(foot[:, :2], halo_box[:, :2]),
                           np.maximum(foot[:, 2:], halo_box[:, 2:])], axis=1)
    lo, hi = overlap_pairs(hull, tol=tol)
    hit = (_hits(foot[lo], halo_box[hi], tol) | _hits(foot[hi], halo_box[lo], tol))
    lo, hi = lo[hit], hi[hit]
    fi, fj = foot[lo], foot[hi]
    area = (overlap_area(fi, halo_box[hi]) + overlap_area(fj, halo_box[lo])
            - overlap_area(fi, fj))
    return lo, hi, area


def grow(boxes: np.ndarray, halo: np.ndarray) -> np.ndarray:
    """Halo boxes: ``boxes`` grown by ``halo`` (``left, bottom, right, top`` per row, µm)."""
    return np.stack([boxes[:, 0] - halo[:, 0], boxes[:, 1] - halo[:, 1],
                     boxes[:, 2] + halo[:, 2], boxes[:, 3] + halo[:, 3]], axis=1)


def clip(rects: np.ndarray, box) -> np.ndarray:
    """``rects`` clipped to ``box`` (``xlo, ylo, xhi, yhi``); those left without area dropped."""
    r = np.asarray(rects, np.float64).reshape(-1, 4)
    r = np.stack([np.clip(r[:, 0], box[0], box[2]), np.clip(r[:, 1], box[1], box[3]),
                  np.clip(r[:, 2], box[0], box[2]), np.clip(r[:, 3], box[1], box[3])], axis=1)
    return r[(r[:, 2] > r[:, 0]) & (r[:, 3] > r[:, 1])]


def _cover(r: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Coordinate compression: distinct x and y edges and the (cells) mask of covered cells."""
    xs = np.unique(r[:, [0, 2]])
    ys = np.unique(r[:, [1, 3]])
    i0, i1 = np.searchsorted(xs, r[:, 0]), np.searchsorted(xs, r[:, 2])
    j0, j1 = np.searchsorted(ys, r[:, 1]), np.searchsorted(ys, r[:, 3])
    diff = np.zeros((len(xs), len(ys)), np.int64)
    np.add.at(diff, (i0, j0), 1)
    np.add.at(diff, (i1, j0), -1)
    np.add.at(diff, (i0, j1), -1)
    np.add.at(diff, (i1, j1), 1)
    cover = np.cumsum(np.cumsum(diff, axis=0), axis=1)[:-1, :-1] > 0
    return xs, ys, cover


def union_rects(rects: np.ndarray, max_edges: int = 2000) -> np.ndarray:
    """Disjoint rectangles covering the union of ``rects`` (coordinate compression).

    Beyond ``max_edges`` distinct edges along an axis the input is returned as it is (overlaps
    then count twice in an area sum).
    """
    rects = np.asarray(rects, np.float64).reshape(-1, 4)
    if len(rects) <= 1:
        return rects
    if (len(np.unique(rects[:, [0, 2]])) > max_edges
            or len(np.unique(rects[:, [1, 3]])) > max_edges):
        return rects
    xs, ys, cover = _cover(rects)
    ci, cj = np.nonzero(cover)
    return np.stack([xs[ci], ys[cj], xs[ci + 1], ys[cj + 1]], axis=1)


def union_area(rects: np.ndarray, box=None, max_rects: int = 1500) -> float:
    """Area of the union of ``rects`` (clipped to ``box`` if given).

    Exact up to ``max_rects`` rectangles; beyond that a lower bound, the largest single area
    (which keeps a capacity check built on it a necessary condition).
    """
    r = np.asarray(rects, np.float64).reshape(-1, 4)
    if box is not None:
        r = clip(r, box)
    r = r[(r[:, 2] > r[:, 0]) & (r[:, 3] > r[:, 1])]
    if not len(r):
        return 0.0
    if len(r) > max_rects:
        return float(((r[:, 2] - r[:, 0]) * (r[:, 3] - r[:, 1])).max())
    xs, ys, cover = _cover(r)
    return float(np.outer(np.diff(xs), np.diff(ys))[cover].sum())
