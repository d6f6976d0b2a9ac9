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
from scipy.sparse.csgraph import connected_components

from ..metrics import BinGrid

__all__ = ["Grid", "make_grid", "rasterize", "capacity_map", "overflow", "lookahead",
           "overfilled_regions", "density_weight"]


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


def density_weight(grid: Grid, w, h, target: float) -> np.ndarray:
    """Weight of each object's area in the density bins: ``target`` for objects larger than a
    bin (a hard block fills the bins under it completely, so counting its area at the target
    density lets it sit anywhere without "overflowing" — the usual scaling of macro area in
    analytic placement), 1 for the rest."""
    big = (np.asarray(w) > grid.bw) | (np.asarray(h) > grid.bh)
    return np.where(big, float(target), 1.0)


def overflow(grid: Grid, cap: np.ndarray, cx, cy, w, h, weight=None) -> float:
    """``Σ_bins max(0, movable area − capacity) ÷ movable area`` for objects centred ``cx, cy``
    (areas times ``weight``, see :func:`density_weight`)."""
    wt = np.ones(len(w)) if weight is None else np.asarray(weight, np.float64)
    total = float(np.sum(w * h * wt))
    if total <= 0:
        return 0.0
    use = rasterize(grid, cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2, wt)
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


def _settle(idx, boxes, reg, cx, cy, w, h, tx, ty) -> None:
    """Objects ``idx`` keep their positions, clamped into their regions (``tx, ty`` written)."""
    b = boxes[reg[idx]]
    tx[idx] = _clamp_into(cx[idx], w[idx], b[:, 0], b[:, 1])
    ty[idx] = _clamp_into(cy[idx], h[idx], b[:, 2], b[:, 3])


def _spread_out(idx, boxes, reg, cx, cy, w, h, tx, ty) -> None:
    """Objects ``idx`` of leaf regions: their span scaled linearly onto the region on each axis
    (relative order kept), so a pile in one corner of a bin is spread over the bin."""
    r = reg[idx]
    b = boxes[r]
    for c, size, lo, hi, t in ((cx, w, b[:, 0], b[:, 1], tx), (cy, h, b[:, 2], b[:, 3], ty)):
        v = c[idx]
        mn = np.full(len(boxes), np.inf)
        mx = np.full(len(boxes), -np.inf)
        np.minimum.at(mn, r, v)
        np.maximum.at(mx, r, v)
        span = mx[r] - mn[r]
        room = np.maximum(hi - lo - size[idx], 0.0)
        f = np.where(span > 1e-12 * (hi - lo), (v - mn[r]) / np.where(span > 0, span, 1), 0.5)
        t[idx] = _clamp_into(lo + size[idx] / 2 + f * room, size[idx], lo, hi)


def _start_regions(grid: Grid, regions, n: int):
    """The regions the bisection starts from, as float boxes ``x0, x1, y0, y1``, and the
    region of each object (-1: it keeps its position)."""
    if regions is None:
        boxes = np.array([[grid.xlo, grid.xlo + grid.nx * grid.bw,
                           grid.ylo, grid.ylo + grid.ny * grid.bh]])
        return boxes, np.zeros(n, np.int64)
    return (np.asarray(regions[0], np.float64).reshape(-1, 4),
            np.asarray(regions[1], np.int64).copy())


def _take_out(grid: Grid, cap, idx, cx, cy, w, h, wt):
    """Capacity ``cap`` less the (weighted) footprints of objects ``idx`` centred ``cx, cy``,
    never negative, and its prefix sums."""
    used = rasterize(grid, cx[idx] - w[idx] / 2, cy[idx] - h[idx] / 2,
                     cx[idx] + w[idx] / 2, cy[idx] + h[idx] / 2, wt[idx])
    cap = np.maximum(cap - used, 0.0)
    return cap, _prefix(cap)


def _leaves(grid: Grid, S, boxes, leaf: float, dmax: float) -> np.ndarray:
    """Mask of the regions not cut further: no larger than ``leaf`` bins along both sides and
    of uniform capacity (no obstacle edge running through them)."""
    small = ((boxes[:, 1] - boxes[:, 0]) <= leaf * grid.bw * (1 + 1e-9)) & \
            ((boxes[:, 3] - boxes[:, 2]) <= leaf * grid.bh * (1 + 1e-9))
    if small.any():
        bs = boxes[small]
        rc = _box_capacity(S, grid, bs[:, 0], bs[:, 1], bs[:, 2], bs[:, 3])
        full = rc >= 0.999 * dmax * (bs[:, 1] - bs[:, 0]) * (bs[:, 3] - bs[:, 2])
        small[np.flatnonzero(small)[~full]] = False
    return small


def _cuts(grid: Grid, boxes):
    """Where each region is cut: across its longer side (``cutx``: a vertical cut line at x),
    on a bin line while the region spans several bins (regions stay bin-aligned, so a leaf is
    exactly one bin), in the middle below that.  Returns ``cutx, mid, half`` (the cut
    coordinate and the length of the shorter part along the cut direction)."""
    bw_ = boxes[:, 1] - boxes[:, 0]
    bh_ = boxes[:, 3] - boxes[:, 2]
    cutx = bw_ >= bh_
    length = np.where(cutx, bw_, bh_)
    pitch = np.where(cutx, grid.bw, grid.bh)
    nb = np.round(length / pitch).astype(np.int64)
    lo_edge = np.where(cutx, boxes[:, 0], boxes[:, 2])
    mid = np.where(nb >= 2, lo_edge + (nb // 2) * pitch, lo_edge + length / 2)
    half = np.minimum(mid - lo_edge, lo_edge + length - mid)
    return cutx, mid, half


def _halves(boxes, cutx, mid):
    """The two children of every region: ``A`` below/left of the cut, ``B`` above/right."""
    A = boxes.copy()
    B = boxes.copy()
    A[:, 1] = np.where(cutx, mid, boxes[:, 1])
    A[:, 3] = np.where(cutx, boxes[:, 3], mid)
    B[:, 0] = np.where(cutx, mid, boxes[:, 0])
    B[:, 2] = np.where(cutx, boxes[:, 2], mid)
    return A, B


def _split(grid: Grid, S, boxes, cutx, mid, active, r_of, cx, cy, area, minimal: bool,
           keep: dict):
    """One cut of every region: its objects ordered along the cut, and which of them go below
    or left of it (``goes_a``), in that order.

    Returns ``A, B, act_s, r_s, goes_a``: the child boxes, the active objects and their regions
    sorted (by region, then along the cut), and the side each takes.  The large intermediates
    go into ``keep`` (the caller's, one per :func:`lookahead` call), each replacing its
    predecessor of the level before, so that they live as long as loop variables would: freed
    all at once on return, their memory went back to the system and was faulted in anew at
    every level (about 6 % of the look-ahead's time at 2e5 objects).
    """
    nreg = len(boxes)
    A, B = _halves(boxes, cutx, mid)
    AB = np.concatenate([A, B])
    capAB = np.maximum(_box_capacity(S, grid, AB[:, 0], AB[:, 1], AB[:, 2], AB[:, 3]), 0.0)
    capA, capB = capAB[:nreg], capAB[nreg:]
    tot = capA + capB
    frac = np.where(tot > 1e-12 * grid.bin_area, capA / np.where(tot > 0, tot, 1.0), 0.5)
    # one argsort on region id + coordinate scaled into [0, 1): by region, then along the
    # cut (deterministic, cheaper than a multi-key lexsort)
    keep["kx"] = kx = (cx[active] - grid.xlo) / (grid.nx * grid.bw)
    keep["ky"] = ky = (cy[active] - grid.ylo) / (grid.ny * grid.bh)
    keep["key"] = key = np.clip(np.where(cutx[r_of], kx, ky), 0.0, 1.0 - 1e-9)
    keep["order"] = order = np.argsort(r_of + key, kind="stable")
    act_s = active[order]
    r_s = r_of[order]
    keep["a_s"] = a_s = area[act_s]
    keep["csum"] = csum = np.cumsum(a_s)
    reg_area = np.bincount(r_s, weights=a_s, minlength=nreg)
    reg_first = np.concatenate([[0.0], np.cumsum(reg_area)[:-1]])
    keep["before"] = before = csum - a_s - reg_first[r_s]
    if minimal:
        # objects keep their own side of the cut unless that side would overfill: the
        # share sent below the cut is the natural one (area of the objects below it),
        # clipped into [area − capB, capA]; when even that interval is empty the split
        # falls back to the capacity ratio
        keep["c_s"] = c_s = np.where(cutx[r_s], cx[act_s], cy[act_s])
        nat = np.bincount(r_s, weights=np.where(c_s < mid[r_s], a_s, 0.0), minlength=nreg)
        lo_s = reg_area - capB
        fits = lo_s <= capA
        share = np.where(fits, np.clip(nat, lo_s, capA), frac * reg_area)
        goes_a = (before + a_s / 2) < share[r_s]
    else:
        goes_a = (before + a_s / 2) < frac[r_s] * reg_area[r_s]
    # an object alone in its region goes on down on its own side while that side has room
    keep["alone"] = alone = np.bincount(r_s, minlength=nreg)[r_s] == 1
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
    return A, B, act_s, r_s, goes_a


def _regroup(A, B, r_s, goes_a):
    """The children that hold objects, and each sorted object's new region among them."""
    nreg = len(A)
    new_reg = 2 * r_s + (~goes_a).astype(np.int64)
    boxes2 = np.empty((2 * nreg, 4))
    boxes2[0::2] = A
    boxes2[1::2] = B
    used_r = np.bincount(new_reg, minlength=2 * nreg) > 0
    remap = np.cumsum(used_r) - 1
    return boxes2[used_r], remap[new_reg]


def lookahead(grid: Grid, cap: np.ndarray, cx, cy, w, h, *, leaf: float = 1.0,
              max_levels: int = 64, regions: tuple[np.ndarray, np.ndarray] | None = None,
              weight=None, minimal: bool = True, scale: np.ndarray | None = None):
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
    regions : (boxes, member), optional
        Start the bisection from these regions instead of the whole core: ``boxes`` is a
        ``(k, 4)`` array of bin-aligned boxes ``x0, x1, y0, y1`` and ``member`` an ``(N,)``
        array giving each object's region, or -1 for an object that keeps its position (see
        :func:`overfilled_regions`).
    weight : (N,) array, optional
        Factor on each object's area against the capacity (:func:`density_weight`).
    minimal : bool
        At each cut, objects stay on their own side unless that side would hold more than its
        capacity (only the excess crosses the cut), so a region with room to spare is not
        spread evenly over its area.  ``False``: split in proportion to the capacities (every
        region filled evenly).
    scale : (N,) bool array, optional
        Objects whose positions in a leaf region are scaled linearly onto the region (each
        axis, order kept) instead of only clamped into it, so that a pile of them in one spot
        of a bin is spread over the bin — meant for soft clusters, which stand for many cells
        and are never legalised (piled up, they read as a density no row could hold).

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
    wt = np.ones(n) if weight is None else np.asarray(weight, np.float64)
    area = np.asarray(w * h * wt, np.float64)
    boxes, reg = _start_regions(grid, regions, n)
    active = np.flatnonzero(reg >= 0)
    if not len(active):
        return tx, ty
    stay = np.flatnonzero(reg < 0)
    if regions is not None and len(stay):
        # objects left where they are take their area out of the capacity of the regions
        cap, S = _take_out(grid, cap, stay, cx, cy, w, h, wt)
    geo = (cx, cy, w, h, tx, ty)
    keep: dict = {}  # the split's large intermediates, level to level (see _split)
    for _level in range(max_levels):
        r_of = reg[active]
        done = _leaves(grid, S, boxes, leaf, dmax)[r_of]
        if done.any():
            fin = active[done]
            if scale is not None and scale[fin].any():
                _spread_out(fin[scale[fin]], boxes, reg, *geo)
                _settle(fin[~scale[fin]], boxes, reg, *geo)
            else:
                _settle(fin, boxes, reg, *geo)
            active = active[~done]
            r_of = r_of[~done]
            if not len(active):
                break
        cutx, mid, half = _cuts(grid, boxes)
        big = np.where(cutx[r_of], w[active], h[active]) > half[r_of]
        if big.any():
            fz = active[big]
            _settle(fz, boxes, reg, *geo)
            # objects larger than a bin take their footprint out of the capacity below; smaller
            # ones stop inside a single bin's worth of region, where capacity is uniform anyway
            fz = fz[(w[fz] > grid.bw) | (h[fz] > grid.bh)]
            if len(fz):
                cap, S = _take_out(grid, cap, fz, tx, ty, w, h, wt)
            active = active[~big]
            r_of = r_of[~big]
            if not len(active):
                break
        A, B, act_s, r_s, goes_a = _split(grid, S, boxes, cutx, mid, active, r_of, cx, cy,
                                          area, minimal, keep)
        boxes, new_reg = _regroup(A, B, r_s, goes_a)
        reg[act_s] = new_reg
        active = act_s
    if len(active):
        _settle(active, boxes, reg, *geo)
    return tx, ty


def overfilled_regions(grid: Grid, cap: np.ndarray, cx, cy, w, h, *, slack: float = 1e-3,
                       weight=None) -> tuple[np.ndarray, np.ndarray]:
    """Regions that the look-ahead step must spread, and which objects each one holds.

    Only overfilled parts of the core are spread, as in the cluster expansion of Kim, Lee,
    Markov (ICCAD 2010) and the bin-region expansion of Lin, Chu, Shinnerl, Bustany,
    Nedelchev (ICCAD 2013): bins whose movable area exceeds their capacity are grouped into
    connected clusters (4-neighbourhood, ``scipy.ndimage.label``); each cluster's bounding box
    grows by whole bins on every side until the objects centred in it fit its capacity (or it
    is the whole core); boxes that meet are merged and grown again.  Objects centred outside
    every box keep their positions, so an under-filled part of the core is never inflated.

    Parameters
    ----------
    grid, cap : the bin grid and its free capacity (:func:`capacity_map`).
    cx, cy, w, h : (N,) centres and footprints of the movable objects.
    slack : float
        A bin counts as overfilled when its movable area exceeds ``(1 + slack) × capacity``.
    weight : (N,) array, optional
        Factor on each object's area (:func:`density_weight`).

    Returns
    -------
    boxes : (k, 4) float array ``x0, x1, y0, y1`` of the regions (bin-aligned).
    member : (N,) int array, the region of each object or -1.
    """
    from scipy import ndimage

    n = len(cx)
    member = np.full(n, -1, np.int64)
    if n == 0:
        return np.zeros((0, 4)), member
    wt = np.ones(n) if weight is None else np.asarray(weight, np.float64)
    use = rasterize(grid, cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2, wt)
    over = use > cap * (1.0 + slack) + 1e-9 * grid.bin_area
    if not over.any():
        return np.zeros((0, 4)), member
    lab, k = ndimage.label(over)
    sl = ndimage.find_objects(lab)
    # bin-index boxes [i0, i1) x [j0, j1)
    B = np.array([[s[0].start, s[0].stop, s[1].start, s[1].stop] for s in sl], np.int64)
    ci, cj = grid.locate(cx, cy)
    area = np.asarray(w * h * wt, np.float64)
    demand = np.zeros((grid.nx, grid.ny))
    np.add.at(demand, (ci, cj), area)
    Sd = _prefix(demand)
    Sc = _prefix(cap)
    lim = np.array([grid.nx, grid.ny])
    for _round in range(64):
        B = _grow(B, Sd, Sc, lim)
        B, merged = _merge(B)
        if not merged:
            break
    boxes = np.stack([grid.xlo + B[:, 0] * grid.bw, grid.xlo + B[:, 1] * grid.bw,
                      grid.ylo + B[:, 2] * grid.bh, grid.ylo + B[:, 3] * grid.bh], axis=1)
    rmap = np.full((grid.nx, grid.ny), -1, np.int64)  # merged boxes are disjoint
    for r, (i0, i1, j0, j1) in enumerate(B):
        rmap[i0:i1, j0:j1] = r
    member = rmap[ci, cj]
    return boxes, member


def _grow(B: np.ndarray, Sd: np.ndarray, Sc: np.ndarray, lim: np.ndarray) -> np.ndarray:
    """Grow every box by one bin a side (within the grid) until its demand fits its capacity;
    all boxes step together, so the loop runs at most ``max(nx, ny)`` times."""
    B = B.copy()
    while True:
        d = _rect_sum(Sd, B[:, 0], B[:, 1], B[:, 2], B[:, 3])
        c = _rect_sum(Sc, B[:, 0], B[:, 1], B[:, 2], B[:, 3])
        whole = (B[:, 0] == 0) & (B[:, 2] == 0) & (B[:, 1] == lim[0]) & (B[:, 3] == lim[1])
        need = (d > c * (1 + 1e-9)) & ~whole
        if not need.any():
            return B
        g = B[need]
        g[:, 0] = np.maximum(g[:, 0] - 1, 0)
        g[:, 2] = np.maximum(g[:, 2] - 1, 0)
        g[:, 1] = np.minimum(g[:, 1] + 1, lim[0])
        g[:, 3] = np.minimum(g[:, 3] + 1, lim[1])
        B[need] = g


def _merge(B: np.ndarray) -> tuple[np.ndarray, bool]:
    """Merge boxes that overlap (by at least one bin) into their bounding boxes, repeatedly;
    returns the boxes and whether anything merged."""
    merged_any = False
    while len(B) > 1:
        if len(B) > 1500:  # many boxes: merge through a painted cover map instead of pairs
            P = _merge_painted(B)
            return P, len(P) != len(B)
        ox = np.minimum(B[:, None, 1], B[None, :, 1]) > np.maximum(B[:, None, 0], B[None, :, 0])
        oy = np.minimum(B[:, None, 3], B[None, :, 3]) > np.maximum(B[:, None, 2], B[None, :, 2])
        hit = ox & oy
        np.fill_diagonal(hit, False)
        if not hit.any():
            break
        k, lab = connected_components(sp.csr_array(hit), directed=False)
        nb = np.empty((k, 4), np.int64)
        for col, fn in ((0, np.minimum), (2, np.minimum), (1, np.maximum), (3, np.maximum)):
            init = np.iinfo(np.int64).max if fn is np.minimum else -1
            v = np.full(k, init, np.int64)
            fn.at(v, lab, B[:, col])
            nb[:, col] = v
        B = nb
        merged_any = True
    return B, merged_any


def _merge_painted(B: np.ndarray) -> np.ndarray:
    """Bounding boxes of the connected pieces of the union of ``B`` (bins; pieces that only
    touch are joined too, which merely makes a region a little larger)."""
    from scipy import ndimage

    nx, ny = int(B[:, 1].max()), int(B[:, 3].max())
    cov = np.zeros((nx + 1, ny + 1), np.int64)
    np.add.at(cov, (B[:, 0], B[:, 2]), 1)
    np.add.at(cov, (B[:, 1], B[:, 2]), -1)
    np.add.at(cov, (B[:, 0], B[:, 3]), -1)
    np.add.at(cov, (B[:, 1], B[:, 3]), 1)
    lab, _ = ndimage.label(cov.cumsum(0).cumsum(1)[:nx, :ny] > 0)
    return np.array([[s[0].start, s[0].stop, s[1].start, s[1].stop]
                     for s in ndimage.find_objects(lab)], np.int64)
