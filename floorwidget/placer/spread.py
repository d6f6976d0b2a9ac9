"""Density bins and look-ahead spreading (rough legalisation) for the quadratic placer.

Each spreading iteration turns the current (overlapping) placement into a density-feasible
*look-ahead* placement by recursive bisection of the core over a bin grid: a region's objects
are ordered along the cut direction and split where their cumulative area matches the share of
free capacity on each side (capacity = target density × bin area not covered by fixed objects or
blockages).  Objects too large for the next level (macros) stop at the level where they still
fit and become obstacles for the levels below.  Anchor pseudo-nets then pull every object toward
its look-ahead spot, with weights that grow per iteration, and the quadratic solve is repeated.

Everything is vectorised over the objects; the only Python loop is over the levels of the
bisection (about ``log2(nx) + log2(ny)`` of them).

References
----------
M.-C. Kim, D.-J. Lee, I. L. Markov, Proc. IEEE/ACM ICCAD 2010 (look-ahead legalisation with
anchor pseudo-nets).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

__all__ = ["Grid", "make_grid", "rasterize", "capacity_map", "overflow", "lookahead"]


@dataclass(frozen=True)
class Grid:
    """A regular bin grid over a rectangle (fields match ``metrics.BinGrid``)."""

    xlo: float
    ylo: float
    nx: int
    ny: int
    bw: float
    bh: float

    @property
    def bin_area(self) -> float:
        return self.bw * self.bh


def make_grid(core, widths, heights, bin_size=None, max_bins: int = 1024) -> Grid:
    """A grid over ``core`` whose bins hold a handful of the objects.

    The default bin side is the larger of ``sqrt(4 × mean object area)`` and 1.5 × the median
    object side (a bin must be able to hold a typical object), capped at ``max_bins`` per side.
    """
    cw, ch = float(core[2] - core[0]), float(core[3] - core[1])
    if bin_size is None:
        if len(widths):
            a = widths * heights
            side = max(np.sqrt(4.0 * float(np.mean(a))),
                       1.5 * float(np.median(np.maximum(widths, heights))))
        else:
            side = max(cw, ch) / 8
        bin_size = side
    nx = int(np.clip(round(cw / bin_size), 1, max_bins))
    ny = int(np.clip(round(ch / bin_size), 1, max_bins))
    return Grid(float(core[0]), float(core[1]), nx, ny, cw / nx, ch / ny)


def _overlap_matrix(lo, hi, origin, pitch, nbins):
    """Sparse ``(k, nbins)`` matrix of the length of each interval inside each bin."""
    lo = np.asarray(lo, np.float64)
    hi = np.asarray(hi, np.float64)
    k = len(lo)
    f0 = (lo - origin) / pitch
    f1 = (hi - origin) / pitch
    b0 = np.clip(np.floor(f0).astype(np.int64), 0, nbins - 1)
    b1 = np.clip(np.ceil(f1).astype(np.int64) - 1, 0, nbins - 1)
    b1 = np.maximum(b1, b0)
    cnt = b1 - b0 + 1
    row = np.repeat(np.arange(k), cnt)
    first = np.repeat(np.cumsum(cnt) - cnt, cnt)
    col = b0[row] + (np.arange(len(row)) - first)
    left = origin + col * pitch
    length = np.minimum(hi[row], left + pitch) - np.maximum(lo[row], left)
    length = np.maximum(length, 0.0)
    return sp.csr_array((length, (row, col)), shape=(k, nbins))


def rasterize(grid: Grid, xlo, ylo, xhi, yhi, weight=None) -> np.ndarray:
    """Exact area of rectangles inside each bin, ``(nx, ny)``; parts outside the grid are lost.

    The area of a rectangle in bin ``(i, j)`` is the product of its x-overlap with column ``i``
    and its y-overlap with row ``j``; summed over rectangles that is ``Ox.T @ Oy`` with sparse
    overlap matrices, so no loop over rectangles is needed.
    """
    if len(xlo) == 0:
        return np.zeros((grid.nx, grid.ny))
    ox = _overlap_matrix(xlo, xhi, grid.xlo, grid.bw, grid.nx)
    oy = _overlap_matrix(ylo, yhi, grid.ylo, grid.bh, grid.ny)
    if weight is not None:
        ox = sp.diags_array(np.asarray(weight, np.float64)) @ ox
    return (ox.T @ oy).toarray()


def capacity_map(grid: Grid, target: float, obstacles: np.ndarray) -> np.ndarray:
    """Free capacity per bin: ``target × (bin area − obstacle area)``, never negative.

    ``obstacles`` is a ``(k, 4)`` array of rectangles (fixed blocks, blockages); overlaps between
    obstacles are clipped at the bin area rather than counted twice.
    """
    if len(obstacles):
        o = np.asarray(obstacles, np.float64)
        cov = np.minimum(rasterize(grid, o[:, 0], o[:, 1], o[:, 2], o[:, 3]), grid.bin_area)
    else:
        cov = np.zeros((grid.nx, grid.ny))
    return np.maximum(target * (grid.bin_area - cov), 0.0)


def overflow(grid: Grid, cap: np.ndarray, cx, cy, w, h) -> float:
    """``Σ_bins max(0, movable area − capacity) ÷ movable area`` for objects centred ``cx, cy``."""
    total = float(np.sum(w * h))
    if total <= 0:
        return 0.0
    use = rasterize(grid, cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2)
    return float(np.maximum(use - cap, 0.0).sum() / total)


def _rect_sum(S, i0, i1, j0, j1):
    return S[i1, j1] - S[i0, j1] - S[i1, j0] + S[i0, j0]


def _prefix(cap):
    S = np.zeros((cap.shape[0] + 1, cap.shape[1] + 1))
    S[1:, 1:] = cap.cumsum(0).cumsum(1)
    return S


def lookahead(grid: Grid, cap: np.ndarray, cx, cy, w, h):
    """Density-feasible look-ahead centres for objects now centred at ``cx, cy``.

    Parameters
    ----------
    grid, cap : the bin grid and its free capacity (:func:`capacity_map`).
    cx, cy, w, h : (N,) centres and footprints of the movable objects.

    Returns
    -------
    tx, ty : (N,) look-ahead centres.  Inside each final bin an object keeps its position when it
    lies in the bin and is clamped into it otherwise; objects frozen at a coarser level (larger
    than the next region) keep their position clamped into their region.
    """
    n = len(cx)
    tx = np.array(cx, np.float64)
    ty = np.array(cy, np.float64)
    if n == 0:
        return tx, ty
    cap = cap.copy()
    S = _prefix(cap)
    area = np.asarray(w * h, np.float64)
    # regions as bin index ranges [i0, i1) x [j0, j1)
    reg_box = np.array([[0, grid.nx, 0, grid.ny]], np.int64)
    reg = np.zeros(n, np.int64)
    active = np.arange(n)  # objects still being partitioned
    bw, bh = grid.bw, grid.bh
    done_box = np.zeros((n, 4), np.int64)  # final region of every object
    frozen = np.zeros(n, bool)
    while len(active):
        boxes = reg_box
        ni = boxes[:, 1] - boxes[:, 0]
        nj = boxes[:, 3] - boxes[:, 2]
        leaf = (ni <= 1) & (nj <= 1)
        r_of = reg[active]
        is_leaf = leaf[r_of]
        if is_leaf.any():
            fin = active[is_leaf]
            done_box[fin] = boxes[r_of[is_leaf]]
            active = active[~is_leaf]
            r_of = r_of[~is_leaf]
        if not len(active):
            break
        cutx = (ni * bw >= nj * bh) & (ni > 1) | (nj <= 1)
        mid = np.where(cutx, (boxes[:, 0] + boxes[:, 1]) // 2, (boxes[:, 2] + boxes[:, 3]) // 2)
        # child extents along the cut (µm)
        lo_len = np.where(cutx, (mid - boxes[:, 0]) * bw, (mid - boxes[:, 2]) * bh)
        hi_len = np.where(cutx, (boxes[:, 1] - mid) * bw, (boxes[:, 3] - mid) * bh)
        ext = np.where(cutx[r_of], w[active], h[active])
        big = ext > np.minimum(lo_len, hi_len)[r_of]
        if big.any():
            fz = active[big]
            bx = boxes[reg[fz]]
            x0 = grid.xlo + bx[:, 0] * bw
            x1 = grid.xlo + bx[:, 1] * bw
            y0 = grid.ylo + bx[:, 2] * bh
            y1 = grid.ylo + bx[:, 3] * bh
            tx[fz] = np.where(x1 - x0 >= w[fz], np.clip(cx[fz], x0 + w[fz] / 2, x1 - w[fz] / 2),
                              (x0 + x1) / 2)
            ty[fz] = np.where(y1 - y0 >= h[fz], np.clip(cy[fz], y0 + h[fz] / 2, y1 - h[fz] / 2),
                              (y0 + y1) / 2)
            frozen[fz] = True
            used = rasterize(grid, tx[fz] - w[fz] / 2, ty[fz] - h[fz] / 2,
                             tx[fz] + w[fz] / 2, ty[fz] + h[fz] / 2)
            cap = np.maximum(cap - used, 0.0)
            S = _prefix(cap)
            active = active[~big]
            r_of = r_of[~big]
            if not len(active):
                break
        # split every region's objects by cumulative area along the cut
        rb = boxes
        mx = np.where(cutx, mid, rb[:, 1])  # x-limit of child A
        my = np.where(cutx, rb[:, 3], mid)  # y-limit of child A
        bx0 = np.where(cutx, mid, rb[:, 0])
        by0 = np.where(cutx, rb[:, 2], mid)
        capA = _rect_sum(S, rb[:, 0], mx, rb[:, 2], my)
        capB = _rect_sum(S, bx0, rb[:, 1], by0, rb[:, 3])
        capA = np.maximum(capA, 0.0)
        capB = np.maximum(capB, 0.0)
        tot = capA + capB
        geo = lo_len / np.maximum(lo_len + hi_len, 1e-300)
        frac = np.where(tot > 1e-12 * grid.bin_area, capA / np.where(tot > 0, tot, 1.0), geo)
        key = np.where(cutx[r_of], cx[active], cy[active])
        order = np.lexsort((active, key, r_of))
        act_s = active[order]
        r_s = r_of[order]
        a_s = area[act_s]
        csum = np.cumsum(a_s)
        nreg = len(boxes)
        reg_area = np.bincount(r_s, weights=a_s, minlength=nreg)
        reg_first = np.concatenate([[0.0], np.cumsum(reg_area)[:-1]])
        before = csum - a_s - reg_first[r_s]
        goes_a = (before + a_s / 2) < frac[r_s] * reg_area[r_s]
        # new regions: child A = 2r, child B = 2r + 1
        childA = rb.copy()
        childB = rb.copy()
        childA[:, 1] = np.where(cutx, mid, rb[:, 1])
        childA[:, 3] = np.where(cutx, rb[:, 3], mid)
        childB[:, 0] = np.where(cutx, mid, rb[:, 0])
        childB[:, 2] = np.where(cutx, rb[:, 2], mid)
        new_reg = 2 * r_s + (~goes_a).astype(np.int64)
        boxes2 = np.empty((2 * nreg, 4), np.int64)
        boxes2[0::2] = childA
        boxes2[1::2] = childB
        # compact to the regions in use
        used_ids, inv = np.unique(new_reg, return_inverse=True)
        reg_box = boxes2[used_ids]
        reg[act_s] = inv
        active = act_s
    # place the finished objects inside their final bins
    fin = ~frozen
    bx = done_box[fin]
    x0 = grid.xlo + bx[:, 0] * bw
    x1 = grid.xlo + bx[:, 1] * bw
    y0 = grid.ylo + bx[:, 2] * bh
    y1 = grid.ylo + bx[:, 3] * bh
    wf, hf = w[fin], h[fin]
    tx[fin] = np.where(x1 - x0 >= wf, np.clip(tx[fin], x0 + wf / 2, x1 - wf / 2), (x0 + x1) / 2)
    ty[fin] = np.where(y1 - y0 >= hf, np.clip(ty[fin], y0 + hf / 2, y1 - hf / 2), (y0 + y1) / 2)
    return tx, ty
