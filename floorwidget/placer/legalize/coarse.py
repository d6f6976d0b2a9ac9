"""Few rectangles covering many blockages, for the sequence-pair fallback (step 6).

The packer pays for every obstacle on every move (each macro is compared with each obstacle
in the sequence pair) and keeps four bound tables of obstacles x macros, so 100,000 small
blockages would cost gigabytes and hours.  It gets a cover instead: the blockages rasterised
on a square grid over the core, each cell touched by a blockage (with positive area) blocked,
and the blocked cells joined into rectangles (runs along x, stacked along y where they span
the same cells).  The cover contains every blockage, so a packing legal against it is legal
against the blockages; it is coarser by at most one cell on each side, and the finest cell
that gives few enough rectangles is used.  The final check is always against the blockages
themselves.
"""

from __future__ import annotations

import numpy as np

from .tuning import _COVER_MAX_CELLS


def covered_cells(lo: np.ndarray, hi: np.ndarray, shape: tuple[int, int]) -> np.ndarray:
    """Boolean map of ``shape`` marking the union of the index boxes ``lo[k] <= (i, j) <
    hi[k]`` (``(k, 2)`` integer arrays within the map): one 2-D difference array (a +1/-1 at
    each box corner, by ``bincount``) and two prefix sums, O(boxes + cells)."""
    n0, n1 = shape
    ok = (hi > lo).all(axis=1)
    lo, hi = lo[ok], hi[ok]
    flat = np.concatenate([lo[:, 0] * (n1 + 1) + lo[:, 1], hi[:, 0] * (n1 + 1) + hi[:, 1],
                           hi[:, 0] * (n1 + 1) + lo[:, 1], lo[:, 0] * (n1 + 1) + hi[:, 1]])
    sign = np.repeat(np.array([1.0, 1.0, -1.0, -1.0]), len(lo))
    diff = np.bincount(flat, weights=sign, minlength=(n0 + 1) * (n1 + 1)).astype(np.int32)
    diff = diff.reshape(n0 + 1, n1 + 1)
    return np.cumsum(np.cumsum(diff, axis=0), axis=1)[:n0, :n1] != 0


def _raster(blk: np.ndarray, core: np.ndarray, p: float) -> np.ndarray:
    """Blocked cells ``[row y, column x]`` of the grid of side ``p`` from the core's corner:
    every cell that a blockage overlaps with positive area."""
    nx = max(1, int(np.ceil((core[2] - core[0]) / p)))
    ny = max(1, int(np.ceil((core[3] - core[1]) / p)))
    lo = np.clip(np.floor((blk[:, 1::-1] - core[1::-1]) / p).astype(np.int64), 0, [ny, nx])
    hi = np.ceil((blk[:, :1:-1] - core[1::-1]) / p).astype(np.int64)  # exclusive
    return covered_cells(lo, np.clip(np.maximum(hi, lo + 1), 0, [ny, nx]), (ny, nx))


def _cells_to_rects(mask: np.ndarray) -> np.ndarray:
    """``(k, 4)`` cell-index rectangles ``(x0, y0, x1, y1)``, exclusive ends, exactly covering
    ``mask``: the runs of each row, runs of equal extent in consecutive rows joined."""
    ny, nx = mask.shape
    d = np.diff(np.pad(mask, ((0, 0), (1, 1))).astype(np.int8), axis=1)
    row, s = np.nonzero(d == 1)
    _, e = np.nonzero(d == -1)  # row-major order: the ends pair up with the starts
    if not len(row):
        return np.zeros((0, 4), np.int64)
    o = np.lexsort((row, e, s))
    row, s, e = row[o], s[o], e[o]
    new = np.ones(len(row), bool)
    new[1:] = (s[1:] != s[:-1]) | (e[1:] != e[:-1]) | (row[1:] != row[:-1] + 1)
    g = np.cumsum(new) - 1
    first = np.flatnonzero(new)
    top = np.zeros(g[-1] + 1, np.int64)
    np.maximum.at(top, g, row + 1)
    return np.stack([s[first], row[first], e[first], top], axis=1)


def blockage_cover(blk: np.ndarray, core, limit: int, cell: float) -> np.ndarray:
    """At most ``limit`` rectangles (µm) inside the core whose union contains every part of
    the blockages ``blk`` that lies in the core.

    Parameters
    ----------
    blk : (n, 4) array
        Blockages, ``xlo, ylo, xhi, yhi``.
    core : array_like
        The core box.
    limit : int
        Most rectangles returned (at least 1).
    cell : float
        Finest raster cell tried, µm (e.g. a quarter of the smallest macro side); doubled
        until the cover has at most ``limit`` rectangles.

    Returns
    -------
    (k, 4) array
        ``blk`` clipped to the core when that has at most ``limit`` rectangles, else the
        raster cover (a single cell covers the whole core, so the doubling ends).
    """
    core = np.asarray(core, np.float64)
    b = np.asarray(blk, np.float64).reshape(-1, 4)
    b = np.concatenate([np.maximum(b[:, :2], core[:2]), np.minimum(b[:, 2:], core[2:])], 1)
    b = b[(b[:, 2] > b[:, 0]) & (b[:, 3] > b[:, 1])]
    if len(b) <= limit:
        return b
    span = float(max(core[2] - core[0], core[3] - core[1]))
    p = max(float(cell), span / np.sqrt(_COVER_MAX_CELLS))
    while True:
        k = _cells_to_rects(_raster(b, core, p))
        if len(k) <= limit or p >= span:
            break
        p *= 2.0
    # cell edges in µm, rounded outwards by one ulp so that round-off never uncovers a sliver
    lo = np.nextafter(core[:2] + k[:, :2] * p, -np.inf)
    hi = np.minimum(np.nextafter(core[:2] + k[:, 2:] * p, np.inf), core[2:])
    return np.concatenate([np.maximum(lo, core[:2]), hi], axis=1)
