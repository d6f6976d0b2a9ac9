"""Rectilinear polygons as disjoint rectangles, by one plane sweep in O(n log n).

The sweep keeps the vertical edges that cross a horizontal line, sorted by x; under the
even-odd rule the inside of the polygon on that line is the spans between edges 0-1, 2-3, and
so on.  Such a span (a pair of edges) lasts, unchanged, from the y where it appears to the y
where one of its edges ends or another edge enters it: each span is one output rectangle.  At
one y the edge endpoints, sorted by x, come in pairs (the horizontal edges of a simple polygon,
which are disjoint), and an even number of edges changing in one x window leaves the pairing
outside that window alone, so only the spans that meet a window are closed and reopened.  A
polygon of n vertices therefore gives O(n) rectangles in O(n log n) time (the slab
decomposition of computational geometry, with slabs merged where the span is the same: de Berg,
Cheong, van Kreveld, Overmars, *Computational Geometry*, 3rd ed., Springer 2008, ch. 6 and 14).
"""

from __future__ import annotations

from bisect import bisect_left, insort

import numpy as np

__all__ = ["polygon_rects"]


def polygon_rects(pts, inside: bool = True) -> np.ndarray:
    """Disjoint rectangles covering a rectilinear polygon, or its bounding box minus it.

    Parameters
    ----------
    pts : (m, 2) array_like
        Vertices in order (either sense); the last connects to the first.  Repeated and
        collinear vertices are fine; the inside is taken by the even-odd rule, so a
        self-touching outline is read the usual way.
    inside : bool
        True: rectangles covering the polygon.  False: rectangles covering its bounding box
        minus the polygon (the notches of a rectilinear die outline).

    Returns
    -------
    (k, 4) float64
        ``xlo, ylo, xhi, yhi`` with positive width and height, pairwise without common area;
        k is O(m).

    Raises
    ------
    ValueError
        An edge that is neither horizontal nor vertical, or a vertex that is not finite.

    Examples
    --------
    >>> polygon_rects([(0, 0), (2, 0), (2, 1), (1, 1), (1, 2), (0, 2)]).tolist()
    [[0.0, 0.0, 2.0, 1.0], [0.0, 1.0, 1.0, 2.0]]
    """
    p = np.asarray(pts, dtype=np.float64).reshape(-1, 2)
    if not np.isfinite(p).all():
        raise ValueError("polygon vertex is not finite")
    if len(p) < 3:
        return np.zeros((0, 4))
    q = np.roll(p, -1, axis=0)
    dx, dy = q[:, 0] != p[:, 0], q[:, 1] != p[:, 1]
    diagonal = dx & dy
    if diagonal.any():
        k = int(np.flatnonzero(diagonal)[0])
        raise ValueError(f"polygon edge {k} from {p[k].tolist()} to {q[k].tolist()} is neither "
                         "horizontal nor vertical")
    vert = np.flatnonzero(dy)
    ex = p[vert, 0]
    ey0 = np.minimum(p[vert, 1], q[vert, 1])
    ey1 = np.maximum(p[vert, 1], q[vert, 1])
    tie = np.zeros(len(vert), np.int8)
    box = np.array([p[:, 0].min(), p[:, 1].min(), p[:, 0].max(), p[:, 1].max()])
    if not inside:  # the box's sides join the edges: even-odd then gives box minus polygon
        if not (box[2] > box[0] and box[3] > box[1]):
            return np.zeros((0, 4))
        ex = np.concatenate([ex, box[[0, 2]]])
        ey0 = np.concatenate([ey0, box[[1, 1]]])
        ey1 = np.concatenate([ey1, box[[3, 3]]])
        tie = np.concatenate([tie, np.array([-1, 1], np.int8)])  # outermost at equal x
    if len(ex) < 2:
        return np.zeros((0, 4))
    # rank of every edge in x order; the sweep's active list holds ranks (plain ints)
    order = np.lexsort((np.arange(len(ex)), tie, ex))
    rank = np.empty(len(ex), np.int64)
    rank[order] = np.arange(len(ex))
    xs = ex[order]
    # events: an edge enters at ey0, leaves at ey1; sorted by y, then x
    ev_y = np.concatenate([ey0, ey1])
    ev_x = np.concatenate([ex, ex])
    ev_r = np.concatenate([rank, rank])
    ev_in = np.concatenate([np.ones(len(ex), bool), np.zeros(len(ex), bool)])
    o = np.lexsort((ev_x, ev_y))
    ev_y, ev_x, ev_r, ev_in = ev_y[o], ev_x[o], ev_r[o], ev_in[o]
    # pair consecutive events of one y into windows (even count per y: see module docstring)
    new_y = np.concatenate([[True], ev_y[1:] != ev_y[:-1]])
    grp = np.cumsum(new_y) - 1
    first = np.flatnonzero(new_y)
    pos_in_grp = np.arange(len(ev_y)) - first[grp]
    a = np.flatnonzero(pos_in_grp % 2 == 0)
    b = a + 1
    if len(b) and b[-1] >= len(ev_y) or (ev_y[np.minimum(b, len(ev_y) - 1)] != ev_y[a]).any():
        raise ValueError("polygon outline is not closed")  # cannot happen for a vertex list
    w_lo = np.searchsorted(xs, ev_x[a], side="left").tolist()
    w_hi = np.searchsorted(xs, ev_x[b], side="right").tolist()
    wy = ev_y[a].tolist()
    ra, rb = ev_r[a].tolist(), ev_r[b].tolist()
    ia, ib = ev_in[a].tolist(), ev_in[b].tolist()

    active: list[int] = []
    opened: dict[tuple[int, int], float] = {}  # span (left rank, right rank) -> y it began
    out_l: list[int] = []
    out_r: list[int] = []
    out_y0: list[float] = []
    out_y1: list[float] = []

    def spans(lo: int, hi: int) -> set[tuple[int, int]]:
        """The spans (pairs 2k, 2k+1 of ``active``) meeting positions ``[lo, hi)``."""
        k0 = lo // 2
        k1 = (hi - 1) // 2 if hi > lo else (lo - 1) // 2
        k1 = min(k1, len(active) // 2 - 1)
        return {(active[2 * k], active[2 * k + 1]) for k in range(k0, k1 + 1)}

    for y, rlo, rhi, r1, r2, in1, in2 in zip(wy, w_lo, w_hi, ra, rb, ia, ib):
        lo = bisect_left(active, rlo)
        before = spans(lo, bisect_left(active, rhi))
        for r, enters in ((r1, in1), (r2, in2)):
            if enters:
                insort(active, r)
            else:
                del active[bisect_left(active, r)]
        after = spans(lo, bisect_left(active, rhi))
        for s in before - after:
            y0 = opened.pop(s)
            if y > y0:
                out_l.append(s[0])
                out_r.append(s[1])
                out_y0.append(y0)
                out_y1.append(y)
        for s in after - before:
            opened[s] = y
    rl, rr = np.array(out_l, np.int64), np.array(out_r, np.int64)
    rects = np.stack([xs[rl], np.array(out_y0, np.float64).reshape(-1),
                      xs[rr], np.array(out_y1, np.float64).reshape(-1)], axis=1)
    return rects[rects[:, 2] > rects[:, 0]]
