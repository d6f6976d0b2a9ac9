"""Rectilinear polygons as disjoint rectangles (DEF ``DIEAREA`` and ``BLOCKAGES POLYGON``)."""

from __future__ import annotations

import numpy as np


def _polygon_rects(pts: np.ndarray, inside: bool) -> np.ndarray:
    """Disjoint rectangles covering a rectilinear polygon (``inside``) or its bounding box minus
    the polygon.  Coordinate compression, an even-odd test per cell, then horizontal runs merged
    with identical runs in the rows above.
    """
    xs, ys = np.unique(pts[:, 0]), np.unique(pts[:, 1])
    cx = (xs[:-1] + xs[1:]) / 2
    cy = (ys[:-1] + ys[1:]) / 2
    X, Y = np.meshgrid(cx, cy)  # (ny, nx)
    ins = np.zeros(X.shape, bool)
    a, b = pts, np.roll(pts, -1, axis=0)
    for (x1, y1), (x2, y2) in zip(a, b):  # polygon edges: a handful
        if y1 == y2:
            continue
        lo, hi = min(y1, y2), max(y1, y2)
        xc = x1 + (Y - y1) * (x2 - x1) / (y2 - y1)
        ins ^= (Y > lo) & (Y < hi) & (X < xc)
    want = ins if inside else ~ins
    out = []
    open_runs: dict[tuple[int, int], int] = {}  # (i0, i1) -> row where it began
    for r in range(want.shape[0] + 1):
        runs = set()
        if r < want.shape[0]:
            row = want[r]
            i = 0
            while i < len(row):
                if row[i]:
                    j = i
                    while j + 1 < len(row) and row[j + 1]:
                        j += 1
                    runs.add((i, j + 1))
                    i = j + 1
                else:
                    i += 1
        for run in list(open_runs):
            if run not in runs:
                r0 = open_runs.pop(run)
                out.append((xs[run[0]], ys[r0], xs[run[1]], ys[r]))
        for run in runs:
            open_runs.setdefault(run, r)
    return np.array(out, dtype=np.float64).reshape(-1, 4)
