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

import numpy as np
import scipy.sparse as sp

from ..metrics import BinGrid

__all__ = ["Grid", "make_grid", "rasterize", "capacity_map", "overflow", "lookahead"]


Grid = BinGrid  # the placer bins on its own grid, with the metrics grid type


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


def _cum_capacity(S, grid: Grid, x, y):
    """Integrated capacity over ``[xlo, x] × [ylo, y]``: bilinear in the corner prefix sums,
    which is exact because capacity is uniform inside a bin."""
    fx = np.clip((x - grid.xlo) / grid.bw, 0.0, grid.nx)
    fy = np.clip((y - grid.ylo) / grid.bh, 0.0, grid.ny)
    i = np.minimum(fx.astype(np.int64), grid.nx - 1)
    j = np.minimum(fy.astype(np.int64), grid.ny - 1)
    u = fx - i
    v = fy - j
    return (S[i, j] * (1 - u) * (1 - v) + S[i + 1, j] * u * (1 - v)
            + S[i, j + 1] * (1 - u) * v + S[i + 1, j + 1] * u * v)


def _box_capacity(S, grid: Grid, x0, x1, y0, y1):
    k = len(x0)
    f = _cum_capacity(S, grid, np.concatenate([x1, x0, x1, x0]), np.concatenate([y1, y1, y0, y0]))
    return f[:k] - f[k:2 * k] - f[2 * k:3 * k] + f[3 * k:]


def _clamp_into(c, size, lo, hi):
    """Centre ``c`` moved the least so that ``[c - size/2, c + size/2]`` lies in ``[lo, hi]``
    (the middle when it does not fit)."""
    fits = hi - lo >= size
    return np.where(fits, np.clip(c, lo + size / 2, np.maximum(hi - size / 2, lo + size / 2)),
                    (lo + hi) / 2)


def lookahead(grid: Grid, cap: np.ndarray, cx, cy, w, h, *, leaf: float = 1.0,
              max_levels: int = 64):
    """Density-feasible look-ahead centres for objects now centred at ``cx, cy``.

    Recursive bisection of the core: every region is cut in the middle across its longer
    side, its objects are ordered along the cut and split where their cumulative area reaches
    the free-capacity share of the first half (capacity from ``cap``, uniform inside a bin), and
    the recursion goes on down to regions of one bin (``leaf``) of uniform capacity.  An
    object alone in its region follows its own side of each cut while that side has room.  An
    object longer than the next region along the cut (a macro) stops at the level where it
    still fits, keeps its position clamped into its region, and its footprint is taken out of
    the capacity below.

    Parameters
    ----------
    grid, cap : the bin grid and its free capacity (:func:`capacity_map`).
    cx, cy, w, h : (N,) centres and footprints of the movable objects.
    leaf : float
        Regions no larger than ``leaf`` bins along both sides are not cut further; their
        objects keep their positions clamped into the region (``leaf`` < 1 spreads further,
        down to single objects).
    max_levels : int
        Guard on the recursion depth (objects still shared then are clamped into their region).

    Returns
    -------
    tx, ty : (N,) look-ahead centres; the relative order of objects along every cut is kept.
    """
    n = len(cx)
    tx = np.array(cx, np.float64)
    ty = np.array(cy, np.float64)
    if n == 0:
        return tx, ty
    cap = cap.copy()
    S = _prefix(cap)
    dmax = float(cap.max()) / grid.bin_area
    area = np.asarray(w * h, np.float64)
    x_span = grid.nx * grid.bw
    y_span = grid.ny * grid.bh
    # regions as float boxes x0, x1, y0, y1
    boxes = np.array([[grid.xlo, grid.xlo + x_span, grid.ylo, grid.ylo + y_span]])
    reg = np.zeros(n, np.int64)
    active = np.arange(n)

    def settle(idx):
        b = boxes[reg[idx]]
        tx[idx] = _clamp_into(cx[idx], w[idx], b[:, 0], b[:, 1])
        ty[idx] = _clamp_into(cy[idx], h[idx], b[:, 2], b[:, 3])

    for _level in range(max_levels):
        nreg = len(boxes)
        r_of = reg[active]
        # a region no larger than a leaf (a bin by default) is not cut further, unless part
        # of it has less capacity than the rest (an obstacle edge runs through it)
        small = ((boxes[:, 1] - boxes[:, 0]) <= leaf * grid.bw * (1 + 1e-9)) & \
                ((boxes[:, 3] - boxes[:, 2]) <= leaf * grid.bh * (1 + 1e-9))
        if small.any():
            bs = boxes[small]
            rc = _box_capacity(S, grid, bs[:, 0], bs[:, 1], bs[:, 2], bs[:, 3])
            full = rc >= 0.999 * dmax * (bs[:, 1] - bs[:, 0]) * (bs[:, 3] - bs[:, 2])
            small[np.flatnonzero(small)[~full]] = False
        done = small[r_of]
        if done.any():
            settle(active[done])
            active = active[~done]
            r_of = r_of[~done]
            if not len(active):
                break
        bw_ = boxes[:, 1] - boxes[:, 0]
        bh_ = boxes[:, 3] - boxes[:, 2]
        cutx = bw_ >= bh_
        # cut on a bin line while the region spans several bins (regions stay bin-aligned, so
        # a leaf is exactly one bin), in the middle below that
        length = np.where(cutx, bw_, bh_)
        pitch = np.where(cutx, grid.bw, grid.bh)
        nb = np.round(length / pitch).astype(np.int64)
        lo_edge = np.where(cutx, boxes[:, 0], boxes[:, 2])
        mid = np.where(nb >= 2, lo_edge + (nb // 2) * pitch, lo_edge + length / 2)
        half = np.minimum(mid - lo_edge, lo_edge + length - mid)
        ext = np.where(cutx[r_of], w[active], h[active])
        big = ext > half[r_of]
        if big.any():
            fz = active[big]
            settle(fz)
            # objects larger than a bin take their footprint out of the capacity below; smaller
            # ones stop inside a single bin's worth of region, where capacity is uniform anyway
            fz = fz[(w[fz] > grid.bw) | (h[fz] > grid.bh)]
            if len(fz):
                used = rasterize(grid, tx[fz] - w[fz] / 2, ty[fz] - h[fz] / 2,
                                 tx[fz] + w[fz] / 2, ty[fz] + h[fz] / 2)
                cap = np.maximum(cap - used, 0.0)
                S = _prefix(cap)
            active = active[~big]
            r_of = r_of[~big]
            if not len(active):
                break
        # children: A below/left of the cut, B above/right
        A = boxes.copy()
        B = boxes.copy()
        A[:, 1] = np.where(cutx, mid, boxes[:, 1])
        A[:, 3] = np.where(cutx, boxes[:, 3], mid)
        B[:, 0] = np.where(cutx, mid, boxes[:, 0])
        B[:, 2] = np.where(cutx, boxes[:, 2], mid)
        AB = np.concatenate([A, B])
        capAB = np.maximum(_box_capacity(S, grid, AB[:, 0], AB[:, 1], AB[:, 2], AB[:, 3]), 0.0)
        capA, capB = capAB[:nreg], capAB[nreg:]
        tot = capA + capB
        frac = np.where(tot > 1e-12 * grid.bin_area, capA / np.where(tot > 0, tot, 1.0), 0.5)
        # one argsort on region id + coordinate scaled into [0, 1): by region, then along the
        # cut (deterministic, cheaper than a multi-key lexsort)
        kx = (cx[active] - grid.xlo) / x_span
        ky = (cy[active] - grid.ylo) / y_span
        key = np.clip(np.where(cutx[r_of], kx, ky), 0.0, 1.0 - 1e-9)
        order = np.argsort(r_of + key, kind="stable")
        act_s = active[order]
        r_s = r_of[order]
        a_s = area[act_s]
        csum = np.cumsum(a_s)
        reg_area = np.bincount(r_s, weights=a_s, minlength=nreg)
        reg_first = np.concatenate([[0.0], np.cumsum(reg_area)[:-1]])
        before = csum - a_s - reg_first[r_s]
        goes_a = (before + a_s / 2) < frac[r_s] * reg_area[r_s]
        # an object alone in its region goes on down on its own side while that side has room
        alone = np.bincount(r_s, minlength=nreg)[r_s] == 1
        if alone.any():
            i_al = act_s[alone]
            r_al = r_s[alone]
            c_al = np.where(cutx[r_al], cx[i_al], cy[i_al])
            pref_a = c_al < mid[r_al]
            a_al = area[i_al]
            ok_a = capA[r_al] >= a_al
            ok_b = capB[r_al] >= a_al
            neither = ~ok_a & ~ok_b
            goes_a[alone] = np.where(pref_a, ok_a | (neither & (capA[r_al] >= capB[r_al])),
                                     ~(ok_b | (neither & (capB[r_al] >= capA[r_al]))))
        new_reg = 2 * r_s + (~goes_a).astype(np.int64)
        boxes2 = np.empty((2 * nreg, 4))
        boxes2[0::2] = A
        boxes2[1::2] = B
        used_r = np.bincount(new_reg, minlength=2 * nreg) > 0
        remap = np.cumsum(used_r) - 1
        boxes = boxes2[used_r]
        reg[act_s] = remap[new_reg]
        active = act_s
    if len(active):
        settle(active)
    return tx, ty
