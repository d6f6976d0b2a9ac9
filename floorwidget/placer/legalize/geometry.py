"""Rectangle helpers and tolerances of the macro legaliser (strict: touching rectangles do not
overlap)."""

from __future__ import annotations

import numpy as np

_EPS = 1e-9  # tolerance in grid units when turning a distance into a number of pitches
_GRID_TOL = 1e-6  # µm, as in design.off_grid
_EVAL_CELLS = 1 << 18  # candidate x obstacle comparisons per numpy chunk
_T0 = 0.3  # initial annealing temperature, in median macro sides
_DISP_WEIGHT = 0.3  # weight of the quality term (as this much displacement), halved each run
_RUN_PER_MACRO = 5000  # most annealing moves per macro in one run (at most half the budget)
_SWAP_WINDOW = 0.01  # swap partners at most this fraction of the macros apart in a sequence
_POLISH_PER_MACRO = 200  # annealing moves per macro among legal packings, for the quality term
_SPREAD_MAX = 800  # most macros for the LP over every relation of the sequence pair


# ---------------------------------------------------------------------------------------------
# geometry helpers (all strict: touching rectangles do not overlap)


def _pairs(a: np.ndarray, b: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Index pairs of rectangles with positive-area overlap (``i < j`` when ``b`` is None).

    Sort-and-sweep along x: rows are taken in chunks in order of ``xlo``; a chunk is compared
    only with the columns whose ``xlo`` lies in ``(min xlo - widest column, max xhi)``."""
    same = b is None
    if same:
        b = a
    n, m = len(a), len(b)
    if n == 0 or m == 0:
        return np.zeros(0, np.intp), np.zeros(0, np.intp)
    out_i, out_j = [], []
    order_b = np.argsort(b[:, 0], kind="stable")
    bs = b[order_b]
    widest = float((b[:, 2] - b[:, 0]).max())
    order_a = np.argsort(a[:, 0], kind="stable")
    as_ = a[order_a]
    step = 256
    for s in range(0, n, step):
        aa = as_[s:s + step]
        lo = np.searchsorted(bs[:, 0], aa[0, 0] - widest, side="left")
        hi = np.searchsorted(bs[:, 0], aa[:, 2].max(), side="left")
        if hi <= lo:
            continue
        cols = bs[lo:hi]
        m_ = ((aa[:, None, 0] < cols[None, :, 2]) & (cols[None, :, 0] < aa[:, None, 2])
              & (aa[:, None, 1] < cols[None, :, 3]) & (cols[None, :, 1] < aa[:, None, 3]))
        i, j = np.nonzero(m_)
        i = order_a[i + s]
        j = order_b[j + lo]
        if same:
            keep = i < j
            i, j = i[keep], j[keep]
        out_i.append(i)
        out_j.append(j)
    if not out_i:
        return np.zeros(0, np.intp), np.zeros(0, np.intp)
    i, j = np.concatenate(out_i), np.concatenate(out_j)
    o = np.lexsort((j, i))  # deterministic order, independent of the sweep
    return i[o], j[o]


def _grow(boxes: np.ndarray, halo: np.ndarray) -> np.ndarray:
    """Halo boxes: ``boxes`` grown by ``halo`` (left, bottom, right, top), as Floorplan.rects."""
    return np.stack([boxes[:, 0] - halo[:, 0], boxes[:, 1] - halo[:, 1],
                     boxes[:, 2] + halo[:, 2], boxes[:, 3] + halo[:, 3]], axis=1)


def _conflicts(foot: np.ndarray, halo_box: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Pairs ``i < j`` in conflict under the halo rule: the footprint of one overlaps the halo
    box of the other (halo boxes may overlap each other)."""
    i, j = _pairs(foot, halo_box)
    keep = i != j
    i, j = i[keep], j[keep]
    lo, hi = np.minimum(i, j), np.maximum(i, j)
    if not len(lo):
        return lo, hi
    m = int(hi.max()) + 1
    key = np.unique(lo * m + hi)
    return key // m, key % m


def _union_area(rects: np.ndarray, clip: np.ndarray) -> float:
    """Area of the union of ``rects`` clipped to ``clip`` (coordinate compression).

    Exact up to ~1500 rectangles; beyond that a lower bound (the largest single clipped area),
    which keeps the capacity check a necessary condition.
    """
    r = rects.copy()
    r[:, 0] = np.maximum(r[:, 0], clip[0])
    r[:, 1] = np.maximum(r[:, 1], clip[1])
    r[:, 2] = np.minimum(r[:, 2], clip[2])
    r[:, 3] = np.minimum(r[:, 3], clip[3])
    r = r[(r[:, 2] > r[:, 0]) & (r[:, 3] > r[:, 1])]
    if not len(r):
        return 0.0
    if len(r) > 1500:
        return float(((r[:, 2] - r[:, 0]) * (r[:, 3] - r[:, 1])).max())
    xs = np.unique(r[:, [0, 2]])
    ys = np.unique(r[:, [1, 3]])
    diff = np.zeros((len(xs) + 1, len(ys) + 1), np.int32)
    i0 = np.searchsorted(xs, r[:, 0])
    i1 = np.searchsorted(xs, r[:, 2])
    j0 = np.searchsorted(ys, r[:, 1])
    j1 = np.searchsorted(ys, r[:, 3])
    np.add.at(diff, (i0, j0), 1)
    np.add.at(diff, (i1, j0), -1)
    np.add.at(diff, (i0, j1), -1)
    np.add.at(diff, (i1, j1), 1)
    cover = diff.cumsum(0).cumsum(1)[:-2, :-2] > 0
    return float((np.diff(xs)[:, None] * np.diff(ys)[None, :])[cover].sum())
