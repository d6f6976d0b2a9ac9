"""Standard-cell legalisation onto rows and sites (Abacus) and a swap-based detailed placement.

Row legalisation
----------------
The rows are cut into *segments*: the free stretches of sites left once macros (with their
halos), fixed and pinned cells and placement blockages are taken out.  Cells are then taken in
order of their global x and each one goes to the segment, among the rows near its global y,
where it ends up closest to its global position (squared Euclidean displacement), as in Abacus
(Spindler, Schlichtmann, Johannes, ISPD 2008): the cells of a segment form *clusters* of
abutting cells, and a cluster sits where the sum of its cells' squared x-displacements is least
(``q / e``), merging with its left neighbour while they overlap.  Cluster positions are rounded
to whole sites, so every cell lands on a site.  With the cell order in a row fixed, the
unrounded cluster positions are the optimum of the quadratic displacement problem of that row
(the property the paper proves; ``tests/test_rows.py`` checks it against ``scipy``).

Detailed placement
------------------
Global swap and vertical swap in the manner of Pan, Viswanathan, Chu (ICCAD 2005): for each cell,
its *optimal region* is the median box of the bounding boxes of its nets without it; the cell is
swapped with a cell of the same width in or next to that region (the same row or the rows
toward it) when the swap lowers the HPWL of the nets of both.  Equal widths keep every cell on
its site and the rows overlap-free; a swap is taken only on a strict HPWL gain, so a pass never
raises HPWL.  Adjacent cells of different widths in a row are also swapped (the pair keeps its
span) on a strict gain.

Both kernels are sequential by nature and compiled with numba; every array they take is built
with vectorised numpy.  Soft clusters are not legalised (they stand for many cells).  Multi-row
cells (taller than 1.5 rows) are not handled and are left where the global placement put them.

The results are early-floorplanning estimates; sign-off belongs to the implementation flow.

References
----------
P. Spindler, U. Schlichtmann, F. M. Johannes, "Abacus: fast legalization of standard cell
circuits with minimal movement", ISPD 2008.
M. Pan, N. Viswanathan, C. Chu, ICCAD 2005 (global swap, vertical swap, from memory).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit

from ..design import (
    CELL,
    CLUSTER,
    MOVABLE,
    ORIENT_CODE,
    TERMINAL,
    Design,
    Floorplan,
    orient_offsets,
)
from ..metrics import bin_grid, hpwl, rect_area_map, row_of
from .constraints import partial_capacity_loss, partial_stripes
from .errors import PlacementError

__all__ = ["RowSegments", "row_segments", "legalize_cells", "detailed_place", "cell_mask"]

TOL = 1e-6
FULL_ROWS = 0.9  # cells filling more of the free row area than this are pre-spread by row


def cell_mask(design: Design, fp: Floorplan) -> np.ndarray:
    """Movable standard cells of at most 1.5 row heights: the ones this module places."""
    m = (design.kind == CELL) & (fp.status == MOVABLE)
    if len(design.row_height):
        m &= design.height <= 1.5 * float(np.min(design.row_height)) + TOL
    return m


@dataclass
class RowSegments:
    """Free stretches of the rows, sorted by row level (y) and then x.

    Attributes
    ----------
    y, height : (k,) row bottom and height of each segment, µm.
    x0, site : (k,) x of the row's first site and the site width, µm.
    lo, hi : (k,) first and one-past-last free site (indices into the row).
    orient : (k,) orientation code of the row.
    level_y : (L,) distinct row bottoms, ascending; ``level_start`` (L + 1,) CSR into segments.
    """

    y: np.ndarray
    height: np.ndarray
    x0: np.ndarray
    site: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    orient: np.ndarray
    level_y: np.ndarray
    level_start: np.ndarray

    @property
    def capacity_um2(self) -> float:
        return float(np.sum((self.hi - self.lo) * self.site * self.height))


def _obstacle_rects(design: Design, fp: Floorplan, movable_cells: np.ndarray,
                    avoid: np.ndarray | None = None) -> np.ndarray:
    """What standard cells may not overlap: macro halo boxes, cells that are not being placed
    (fixed, pinned), full placement blockages, the blocked stripes of partial ones (their
    density cap, :func:`~floorwidget.placer.constraints.partial_stripes`), and the rectangles
    ``avoid`` (other cells' fences).  Soft clusters and I/O terminals are no obstacles."""
    k = design.kind
    sel = (k != CLUSTER) & (k != TERMINAL) & ~movable_cells
    # movable cells that this module does not place (multi-row) stay where they are
    r = fp.rects(halo=True)[sel]
    full = design.full_blockages
    stripes = None
    if (design.blockage_max_density > 0).any():
        cells = np.flatnonzero(k == CELL)
        wc = float(np.median(design.width[cells])) if len(cells) else 1.0
        stripes = partial_stripes(design, wc)
    extra = [a for a in (full, stripes, avoid) if a is not None and len(a)]
    return np.concatenate([r, *extra]) if extra else r


def _keep_inside(seg: RowSegments, keep: np.ndarray) -> RowSegments:
    """The parts of the segments inside the rectangles ``keep`` (disjoint; rows wholly
    inside one vertically), in whole sites."""
    s, k = np.divmod(np.arange(len(seg.y) * len(keep)), len(keep))
    b = keep[k]
    ok = (seg.y[s] >= b[:, 1] - TOL) & (seg.y[s] + seg.height[s] <= b[:, 3] + TOL)
    lo = np.maximum(seg.lo[s], np.ceil((b[:, 0] - seg.x0[s]) / seg.site[s] - 1e-9))
    hi = np.minimum(seg.hi[s], np.floor((b[:, 2] - seg.x0[s]) / seg.site[s] + 1e-9))
    ok &= hi > lo
    s, lo, hi = s[ok], lo[ok].astype(np.int64), hi[ok].astype(np.int64)
    srt = np.lexsort((seg.x0[s] + lo * seg.site[s], seg.y[s]))
    s, lo, hi = s[srt], lo[srt], hi[srt]
    y = seg.y[s]
    level_y, level_first = np.unique(y, return_index=True)
    return RowSegments(y=y, height=seg.height[s], x0=seg.x0[s], site=seg.site[s], lo=lo, hi=hi,
                       orient=seg.orient[s], level_y=level_y,
                       level_start=np.concatenate([level_first, [len(y)]]).astype(np.int64))


def row_segments(design: Design, fp: Floorplan, movable_cells: np.ndarray | None = None, *,
                 keep: np.ndarray | None = None, avoid: np.ndarray | None = None
                 ) -> RowSegments:
    """Cut the rows around the obstacles (see :func:`_obstacle_rects`), vectorised; with
    ``keep`` (a fence's rectangles), only the parts of the rows inside them."""
    if movable_cells is None:
        movable_cells = cell_mask(design, fp)
    if keep is not None:
        return _keep_inside(row_segments(design, fp, movable_cells, avoid=avoid),
                            np.asarray(keep, np.float64).reshape(-1, 4))
    ry, rh = design.row_y, design.row_height
    rx, sw, ns = design.row_x, design.row_site_width, design.row_num_sites
    nr = len(ry)
    obs = _obstacle_rects(design, fp, movable_cells, avoid)
    # (row, obstacle) pairs that overlap vertically, through rows sorted by bottom
    order = np.lexsort((rx, ry))
    ys, tops = ry[order], (ry + rh)[order]
    if len(obs) and nr:
        a = np.searchsorted(ys, obs[:, 3] - TOL, side="left")  # rows starting below the top
        if np.all(np.diff(tops) >= 0):
            b = np.searchsorted(tops, obs[:, 1] + TOL, side="right")  # rows ending above
        else:  # rows of mixed heights out of order: scan from the first row
            b = np.zeros(len(obs), np.int64)
        cnt = np.maximum(a - b, 0)
        oi = np.repeat(np.arange(len(obs)), cnt)
        first = np.cumsum(cnt) - cnt
        ri = order[b[oi] + (np.arange(int(cnt.sum())) - first[oi])]
        keep = (ry[ri] < obs[oi, 3] - TOL) & (ry[ri] + rh[ri] > obs[oi, 1] + TOL)
        oi, ri = oi[keep], ri[keep]
        s0 = np.floor((obs[oi, 0] - rx[ri]) / sw[ri] + 1e-9).astype(np.int64)
        s1 = np.ceil((obs[oi, 2] - rx[ri]) / sw[ri] - 1e-9).astype(np.int64)
        s0 = np.clip(s0, 0, ns[ri])
        s1 = np.clip(s1, 0, ns[ri])
        ok = s1 > s0
        ri, s0, s1 = ri[ok], s0[ok], s1[ok]
    else:
        ri = s0 = s1 = np.zeros(0, np.int64)
    # per row: blocked intervals sorted, merged by a running maximum, and their complement
    srt = np.lexsort((s0, ri))
    ri, s0, s1 = ri[srt], s0[srt], s1[srt]
    big = np.int64(ns.max() + 2) if nr else np.int64(1)
    run = np.maximum.accumulate(s1 + ri * big) - ri * big  # reach so far within the row
    prev_reach = np.concatenate([[0], run[:-1]])
    new_row = np.concatenate([[True], ri[1:] != ri[:-1]]) if len(ri) else np.zeros(0, bool)
    prev_reach = np.where(new_row, 0, prev_reach)
    # free gaps: before each interval (from the previous reach), and after the last of a row
    gap_row = ri
    gap_lo = prev_reach
    gap_hi = s0
    last = np.concatenate([ri[1:] != ri[:-1], [True]]) if len(ri) else np.zeros(0, bool)
    blocked_rows = np.unique(ri)
    free_rows = np.setdiff1d(np.arange(nr), blocked_rows)
    seg_row = np.concatenate([gap_row, ri[last], free_rows])
    seg_lo = np.concatenate([gap_lo, run[last], np.zeros(len(free_rows), np.int64)])
    seg_hi = np.concatenate([gap_hi, ns[ri[last]], ns[free_rows]])
    ok = seg_hi > seg_lo
    seg_row, seg_lo, seg_hi = seg_row[ok], seg_lo[ok], seg_hi[ok]
    x0 = rx[seg_row]
    srt = np.lexsort((x0 + seg_lo * sw[seg_row], ry[seg_row]))
    seg_row, seg_lo, seg_hi = seg_row[srt], seg_lo[srt], seg_hi[srt]
    y = ry[seg_row]
    level_y, level_first = np.unique(y, return_index=True)
    level_start = np.concatenate([level_first, [len(y)]]).astype(np.int64)
    return RowSegments(y=y, height=rh[seg_row], x0=rx[seg_row], site=sw[seg_row],
                       lo=seg_lo.astype(np.int64), hi=seg_hi.astype(np.int64),
                       orient=design.row_orient[seg_row].astype(np.int8), level_y=level_y,
                       level_start=level_start)


# ---------------------------------------------------------------------------------------------
# Abacus


@njit(cache=True)
def _clamp_round(q, e, lo, hi_w):
    x = np.floor(q / e + 0.5)
    if x < lo:
        x = lo
    if x > hi_w:
        x = hi_w
    return x


@njit(cache=True)
def _trial(s, xt, w, top, c_e, c_q, c_w, c_x, c_prev, lo, hi):
    """New site of a cell of ``w`` sites with target ``xt`` appended to segment ``s``."""
    ce = 1.0
    cq = xt
    cw = w
    x = _clamp_round(cq, ce, lo, hi - cw)
    c = top[s]
    while c >= 0 and c_x[c] + c_w[c] > x:
        cq = c_q[c] + cq - ce * c_w[c]
        ce = c_e[c] + ce
        cw = c_w[c] + cw
        x = _clamp_round(cq, ce, lo, hi - cw)
        c = c_prev[c]
    return x + cw - w


@njit(cache=True)
def _abacus(order, tx, ty, wum, s_y, s_x0, s_site, s_lo, s_hi, s_left, level_y, level_start,
            own_row):
    n = len(tx)
    k = len(s_y)
    top = np.full(k, -1, np.int64)
    used = np.zeros(k, np.int64)
    count = np.zeros(k, np.int64)
    c_e = np.zeros(n + 1)
    c_q = np.zeros(n + 1)
    c_w = np.zeros(n + 1)
    c_x = np.zeros(n + 1)
    c_prev = np.full(n + 1, -1, np.int64)
    c_first = np.zeros(n + 1, np.int64)
    nc = 0
    cell_seg = np.full(n, -1, np.int64)
    cell_ord = np.zeros(n, np.int64)
    L = len(level_y)
    for oi in range(len(order)):
        i = order[oi]
        best = np.inf
        best_s = -1
        # nearest level, then outwards while the vertical distance alone can still win
        lv = np.searchsorted(level_y, ty[i])
        up = lv
        dn = lv - 1
        first = True
        while up < L or dn >= 0:
            if not first and own_row and best_s >= 0:
                break  # the nearest row had room: stay in it
            first = False
            if up < L and (dn < 0 or abs(level_y[up] - ty[i]) <= abs(level_y[dn] - ty[i])):
                l_ = up
                up += 1
            else:
                l_ = dn
                dn -= 1
            dy = level_y[l_] - ty[i]
            if dy * dy >= best:  # levels come nearest first: no later one can win
                break
            a = level_start[l_]
            b = level_start[l_ + 1]
            # segment holding the target x, then neighbours while they can still win
            j0 = a + np.searchsorted(s_left[a:b], tx[i], side="right") - 1
            if j0 < a:
                j0 = a
            for direction in (0, 1):
                j = j0 if direction == 0 else j0 + 1
                while a <= j < b:
                    sw = s_site[j]
                    left = s_x0[j] + s_lo[j] * sw
                    right = s_x0[j] + s_hi[j] * sw
                    gap = 0.0
                    if tx[i] < left:
                        gap = left - tx[i]
                    elif tx[i] + wum[i] > right:
                        gap = tx[i] + wum[i] - right
                    if gap * gap + dy * dy >= best:
                        break
                    w = np.int64(np.ceil(wum[i] / sw - 1e-9))
                    if used[j] + w <= s_hi[j] - s_lo[j]:
                        xs = _trial(j, (tx[i] - s_x0[j]) / sw, w, top, c_e, c_q, c_w, c_x,
                                    c_prev, s_lo[j], s_hi[j])
                        dx = s_x0[j] + xs * sw - tx[i]
                        cost = dx * dx + dy * dy
                        if cost < best:
                            best = cost
                            best_s = j
                    j = j - 1 if direction == 0 else j + 1
        if best_s < 0:
            return cell_seg, cell_ord, i
        # commit to best_s
        s = best_s
        sw = s_site[s]
        w = np.int64(np.ceil(wum[i] / sw - 1e-9))
        ce = 1.0
        cq = (tx[i] - s_x0[s]) / sw
        cw = np.float64(w)
        first = count[s]
        x = _clamp_round(cq, ce, s_lo[s], s_hi[s] - cw)
        c = top[s]
        while c >= 0 and c_x[c] + c_w[c] > x:
            cq = c_q[c] + cq - ce * c_w[c]
            ce = c_e[c] + ce
            cw = c_w[c] + cw
            first = c_first[c]
            x = _clamp_round(cq, ce, s_lo[s], s_hi[s] - cw)
            c = c_prev[c]
        c_e[nc] = ce
        c_q[nc] = cq
        c_w[nc] = cw
        c_x[nc] = x
        c_prev[nc] = c
        c_first[nc] = first
        top[s] = nc
        nc += 1
        cell_seg[i] = s
        cell_ord[i] = count[s]
        count[s] += 1
        used[s] += w
    # final sites: walk every segment's clusters from the top down
    start = np.zeros(k + 1, np.int64)
    for s in range(k):
        start[s + 1] = start[s] + count[s]
    lst = np.empty(start[k], np.int64)
    for i in range(n):
        if cell_seg[i] >= 0:
            lst[start[cell_seg[i]] + cell_ord[i]] = i
    site_of = np.zeros(n, np.int64)
    for s in range(k):
        end = count[s]
        c = top[s]
        sw = s_site[s]
        while c >= 0:
            pos = np.int64(c_x[c])
            for t in range(c_first[c], end):
                i = lst[start[s] + t]
                site_of[i] = pos
                pos += np.int64(np.ceil(wum[i] / sw - 1e-9))
            end = c_first[c]
            c = c_prev[c]
    return cell_seg, site_of, -1


def _row_spread(design: Design, seg: RowSegments, x, y, w, h):
    """Lower-left targets for Abacus: the cells moved only as far as needed for every bin of
    one row by a few sites to hold no more cell area than its free sites (the look-ahead
    bisection with the minimal split, at density 1 over the row segments), so that a full
    design's cells do not queue for the last free sites far from where they belong.  Rows of
    uneven height are left alone."""
    from .spread import Grid, lookahead

    levels = seg.level_y
    rh = float(np.median(seg.height))
    if len(levels) < 2 or not np.allclose(np.diff(levels), rh) or not np.allclose(seg.height,
                                                                                    rh):
        return x, y
    c = design.core
    site = float(np.median(seg.site))
    # bins of a whole number of sites, so that cells of whole sites fill them exactly (the
    # last column may reach past the core: it has no capacity there)
    bw = site * max(1, int(np.ceil((c[2] - c[0]) / site / 4096)), 8)
    cols = int(np.ceil((c[2] - c[0]) / bw - 1e-9))
    grid = Grid(float(c[0]), float(levels[0]), cols, len(levels), bw, rh)
    segr = np.stack([seg.x0 + seg.lo * seg.site, seg.y, seg.x0 + seg.hi * seg.site,
                     seg.y + seg.height], axis=1)
    cap = rect_area_map(grid, segr)
    tx, ty = lookahead(grid, cap, x + w / 2, y + h / 2, w, h, minimal=True)
    return tx - w / 2, ty - h / 2


def legalize_cells(design: Design, fp: Floorplan, cells: np.ndarray | None = None, *,
                   spread: bool = True, keep: np.ndarray | None = None,
                   avoid: np.ndarray | None = None, free: np.ndarray | None = None
                   ) -> tuple[Floorplan, dict]:
    """Put the movable standard cells on rows and sites with minimum displacement (Abacus).

    Parameters
    ----------
    design : Design
    fp : Floorplan
        Macros (and anything else not being placed) are where they will stay; cells at their
        global-placement positions.  Not modified.
    cells : (n,) bool, optional
        The cells to legalise (default :func:`cell_mask`).
    spread : bool
        When the cells fill more than :data:`FULL_ROWS` of the free row area, first move them
        only as far as needed for every row bin to hold them (:func:`_row_spread`) and keep
        each in its row when it has room there (on a 100 %-full known-optimum instance of
        10^4 cells this cut the mean displacement from 2.8 to 0.2 sites; on a 40 %-full design
        it cost 2 % HPWL, hence the threshold).  ``False``: Abacus straight from the input.
    keep, avoid : (k, 4) arrays, optional
        Only the rows inside ``keep`` (a fence of these cells), or only outside ``avoid``
        (the fences of other cells); see :func:`floorwidget.placer.constraints.row_groups`.
    free : (n,) bool, optional
        Cells that are no obstacles though not legalised here (the other groups of a fenced
        design, still at their global positions); default ``cells``.

    Returns
    -------
    (Floorplan, dict)
        The new floorplan (cells on sites, in the row's orientation) and facts:
        ``cells_legalized``, ``cell_displacement`` (mean, µm), ``cell_max_displacement``.

    Raises
    ------
    PlacementError
        When the rows have no room for some cell (named), or the design has cells but no rows.
    """
    cells = cell_mask(design, fp) if cells is None else np.asarray(cells, bool)
    idx = np.flatnonzero(cells)
    out = fp.copy()
    info = {"cells_legalized": int(len(idx)), "cell_displacement": 0.0,
            "cell_max_displacement": 0.0}
    if not len(idx):
        return out, info
    if not len(design.row_y):
        raise PlacementError(f"design {design.name!r} has standard cells but no rows; "
                             "use cells='global'")
    seg = row_segments(design, fp, cells if free is None else free, keep=keep, avoid=avoid)
    w = design.width[idx]
    need = float(np.sum(w * design.height[idx]))
    if need > seg.capacity_um2 * (1 + 1e-9):
        where = "" if keep is None else " inside their fence"
        raise PlacementError(f"standard cells need {need:.6g} µm² but the free row area"
                             f"{where} is {seg.capacity_um2:.6g} µm²")
    tx = fp.x[idx].astype(np.float64)
    ty = fp.y[idx].astype(np.float64)
    full = need > FULL_ROWS * seg.capacity_um2
    if spread and full:
        tx, ty = _row_spread(design, seg, tx, ty, w, design.height[idx])
    order = np.argsort(tx, kind="stable")
    cseg, site, failed = _abacus(order, tx, ty, w, seg.y, seg.x0, seg.site, seg.lo, seg.hi,
                                 seg.x0 + seg.lo * seg.site, seg.level_y, seg.level_start,
                                 spread and full)
    if failed >= 0:
        raise PlacementError(f"cell {design.names[idx[failed]]!r} ({w[failed]:g} µm wide) "
                             "finds no row segment with room")
    nx_ = seg.x0[cseg] + site * seg.site[cseg]
    ny_ = seg.y[cseg]
    out.x[idx] = nx_
    out.y[idx] = ny_
    ro = seg.orient[cseg]
    out.orient[idx] = np.where(np.isin(ro, [ORIENT_CODE["N"], ORIENT_CODE["FS"]]), ro,
                               ORIENT_CODE["N"])
    d = np.hypot(nx_ - tx, ny_ - ty)
    info["cell_displacement"] = float(d.mean())
    info["cell_max_displacement"] = float(d.max())
    return out, info


# ---------------------------------------------------------------------------------------------
# detailed placement: global moves into free sites, global and vertical swaps, adjacent swaps

MAX_SITES = 200_000_000  # site map size above which detailed placement is skipped


def _fill_runs(occ: np.ndarray, start: np.ndarray, length: np.ndarray, value: np.ndarray
               ) -> None:
    """``occ[start[k] : start[k] + length[k]] = value[k]`` for every k, vectorised."""
    length = np.asarray(length, np.int64)
    tot = int(length.sum())
    if not tot:
        return
    rep = np.repeat(np.arange(len(length)), length)
    first = np.cumsum(length) - length
    occ[np.repeat(start, length) + (np.arange(tot) - first[rep])] = np.repeat(value, length)


SMALL_NET = 16  # nets with more pins update their bounding box incrementally when they can


@njit(cache=True)
def _bbox_after(net, N, bx, by, osign, a, ax, ay, asg, b, bxx, byy, bsg):
    """Bounding box ``x0, x1, y0, y1`` of ``net`` once block ``a`` is centred at (ax, ay) with
    y-offset sign ``asg`` and ``b`` at (bxx, byy, bsg) (-1: no such block).

    A large net whose moved pins all lie strictly inside its stored box only grows by their
    new positions (its box cannot shrink); otherwise the box is recomputed from every pin."""
    ns, pb, pdx, pdy, bnet_s, bnets, bpins, bb = N
    if ns[net + 1] - ns[net] > SMALL_NET:
        x0, x1, y0, y1 = bb[net, 0], bb[net, 1], bb[net, 2], bb[net, 3]
        nx0, nx1, ny0, ny1 = x0, x1, y0, y1
        inside = True
        for side in range(2):
            blk = a if side == 0 else b
            if blk < 0:
                continue
            cx = ax if side == 0 else bxx
            cy = ay if side == 0 else byy
            sg = asg if side == 0 else bsg
            for t in range(bnet_s[blk], bnet_s[blk + 1]):
                if bnets[t] != net:
                    continue
                p = bpins[t]
                ox = bx[blk] + pdx[p]
                oy = by[blk] + osign[blk] * pdy[p]
                if not (x0 < ox < x1 and y0 < oy < y1):
                    inside = False
                x = cx + pdx[p]
                y = cy + sg * pdy[p]
                nx0 = min(nx0, x)
                nx1 = max(nx1, x)
                ny0 = min(ny0, y)
                ny1 = max(ny1, y)
        if inside:
            return nx0, nx1, ny0, ny1
    return _scan_box(net, ns, pb, pdx, pdy, bx, by, osign, -1, a, ax, ay, asg, b, bxx, byy,
                     bsg)


@njit(cache=True)
def _scan_box(net, ns, pb, pdx, pdy, bx, by, osign, skip, a, ax, ay, asg, b, bxx, byy, bsg):
    """Bounding box ``x0, x1, y0, y1`` of ``net`` from all its pins, leaving out block
    ``skip`` and with blocks ``a`` and ``b`` at the centres given (-1: none); an empty box has
    ``x0 > x1``."""
    x0 = np.inf
    x1 = -np.inf
    y0 = np.inf
    y1 = -np.inf
    for p in range(ns[net], ns[net + 1]):
        k = pb[p]
        if k == skip:
            continue
        if k == a:
            x = ax + pdx[p]
            y = ay + asg * pdy[p]
        elif k == b:
            x = bxx + pdx[p]
            y = byy + bsg * pdy[p]
        else:
            x = bx[k] + pdx[p]
            y = by[k] + osign[k] * pdy[p]
        x0 = min(x0, x)
        x1 = max(x1, x)
        y0 = min(y0, y)
        y1 = max(y1, y)
    return x0, x1, y0, y1


@njit(cache=True)
def _swap_gain(i, j, nxi, nyi, sgi, nxj, nyj, sgj, N, bx, by, osign, stamp, tick, commit):
    """HPWL before minus after moving i (and j, unless -1) to their new centres, every net
    counted once; with ``commit`` the stored net boxes take their new values."""
    bnet_s, bnets, bb = N[4], N[5], N[7]
    gain = 0.0
    for side in range(2):
        blk = i if side == 0 else j
        if blk < 0:
            continue
        for t in range(bnet_s[blk], bnet_s[blk + 1]):
            net = bnets[t]
            if stamp[net] == tick:
                continue
            stamp[net] = tick
            x0, x1, y0, y1 = _bbox_after(net, N, bx, by, osign, i, nxi, nyi, sgi, j, nxj,
                                         nyj, sgj)
            gain += (bb[net, 1] - bb[net, 0] + bb[net, 3] - bb[net, 2]) - (x1 - x0 + y1 - y0)
            if commit:
                bb[net, 0] = x0
                bb[net, 1] = x1
                bb[net, 2] = y0
                bb[net, 3] = y1
    return gain


@njit(cache=True)
def _median_target(i, N, bx, by, osign, maxdeg, buf_x, buf_y):
    """Centre of the optimal region of block i: the median of the bounding-box ends of its
    nets without it (returns NaN when it has no such net)."""
    ns, pb, pdx, pdy, bnet_s, bnets = N[0], N[1], N[2], N[3], N[4], N[5]
    m = 0
    for t in range(bnet_s[i], bnet_s[i + 1]):
        net = bnets[t]
        if ns[net + 1] - ns[net] > maxdeg:
            continue
        x0, x1, y0, y1 = _scan_box(net, ns, pb, pdx, pdy, bx, by, osign, i, -1, 0.0, 0.0, 1.0,
                                   -1, 0.0, 0.0, 1.0)
        if x0 > x1:
            continue
        buf_x[m] = x0
        buf_y[m] = y0
        buf_x[m + 1] = x1
        buf_y[m + 1] = y1
        m += 2
    if m == 0:
        return np.nan, np.nan
    sx = np.sort(buf_x[:m])
    sy = np.sort(buf_y[:m])
    return 0.5 * (sx[m // 2 - 1] + sx[m // 2]), 0.5 * (sy[m // 2 - 1] + sy[m // 2])


@njit(cache=True)
def _global_moves(cells, wsite, bx, by, hgt, osign, row_of_cell, site_of_cell, occ, row_off,
                  r_x0, r_sw, r_y, r_ns, r_sign, rows_by_y, N, maxdeg, passes, nbuf,
                  reach_rows, reach_sites, swap_reach, D):
    """Global moves and swaps: each cell goes to a free run of sites, or swaps with a cell of
    its width, near its optimal region, on the best strict HPWL gain.  ``occ`` maps every
    site of every row to the cell on it (-1 free, -2 blocked).  ``D`` = (usage, capacity,
    x0, y0, bin width, bin height): a move into another density bin must keep that bin within
    its capacity (swaps of equal widths change no bin's usage)."""
    use, cap, dx0, dy0, dbw, dbh = D
    dnx, dny = use.shape
    stamp = np.zeros(len(N[0]) - 1, np.int64)
    tick = 0
    buf_x = np.empty(nbuf)
    buf_y = np.empty(nbuf)
    ys = r_y[rows_by_y]
    nr = len(rows_by_y)
    total = 0.0
    moves = 0
    for _p in range(passes):
        for ci in range(len(cells)):
            i = cells[ci]
            tx, ty = _median_target(i, N, bx, by, osign, maxdeg, buf_x, buf_y)
            if np.isnan(tx):
                continue
            w = wsite[i]
            r0 = row_of_cell[i]
            s0 = site_of_cell[i]
            wum = w * r_sw[r0]
            ly = ty - hgt[i] / 2
            best = 1e-9
            best_r = -1
            best_s = -1
            best_j = -1
            k = np.searchsorted(ys, ly)
            up = k
            dn = k - 1
            for _t in range(2 * reach_rows):
                if up < nr and (dn < 0 or ys[up] - ly <= ly - ys[dn]):
                    r = rows_by_y[up]
                    up += 1
                elif dn >= 0:
                    r = rows_by_y[dn]
                    dn -= 1
                else:
                    break
                sw = r_sw[r]
                if abs(sw * w - wum) > 1e-9 * wum:
                    continue
                st = np.int64(np.floor((tx - wum / 2 - r_x0[r]) / sw + 0.5))
                lo = max(st - reach_sites, 0)
                hi = min(st + reach_sites + w, r_ns[r])
                base = row_off[r]
                ny_ = r_y[r] + hgt[i] / 2
                sg = r_sign[r]
                q = lo
                while q < hi:
                    c = occ[base + q]
                    if c == -1 or c == i:
                        # a run of free sites (the cell's own count as free)
                        e = q
                        while e < r_ns[r] and (occ[base + e] == -1 or occ[base + e] == i):
                            e += 1
                        b0 = q
                        while b0 > 0 and (occ[base + b0 - 1] == -1 or occ[base + b0 - 1] == i):
                            b0 -= 1
                        if e - b0 >= w:
                            sp = min(max(st, b0), e - w)
                            nx_ = r_x0[r] + (sp + w / 2.0) * sw
                            ki = min(max(int((nx_ - dx0) / dbw), 0), dnx - 1)
                            kj = min(max(int((ny_ - dy0) / dbh), 0), dny - 1)
                            same = ki == min(max(int((bx[i] - dx0) / dbw), 0), dnx - 1) and \
                                kj == min(max(int((by[i] - dy0) / dbh), 0), dny - 1)
                            room = same or use[ki, kj] + wum * hgt[i] <= cap[ki, kj]
                            if room and not (r == r0 and sp == s0):
                                tick += 1
                                g = _swap_gain(i, -1, nx_, ny_, sg, 0.0, 0.0, 1.0, N, bx,
                                               by, osign, stamp, tick, False)
                                if g > best:
                                    best, best_r, best_s, best_j = g, r, sp, -1
                        q = e
                    elif c >= 0:
                        if wsite[c] == w and site_of_cell[c] == q and row_of_cell[c] == r \
                                and abs(q - st) <= swap_reach:
                            tick += 1
                            g = _swap_gain(i, c, bx[c], ny_, sg, bx[i],
                                           r_y[r0] + hgt[c] / 2, osign[i], N, bx, by, osign,
                                           stamp, tick, False)
                            if g > best:
                                best, best_r, best_s, best_j = g, r, q, c
                        q += 1
                    else:
                        q += 1
            if best_r < 0:
                continue
            r = best_r
            sp = best_s
            j = best_j
            tick += 1
            if j >= 0:
                _swap_gain(i, j, bx[j], r_y[r] + hgt[i] / 2, osign[j], bx[i],
                           r_y[r0] + hgt[j] / 2, osign[i], N, bx, by, osign, stamp, tick, True)
                xi, gi = bx[i], osign[i]
                bx[i], by[i], osign[i] = bx[j], r_y[r] + hgt[i] / 2, osign[j]
                bx[j], by[j], osign[j] = xi, r_y[r0] + hgt[j] / 2, gi
                row_of_cell[j], site_of_cell[j] = r0, s0
                for t in range(w):
                    occ[row_off[r0] + s0 + t] = j
                    occ[row_off[r] + sp + t] = i
            else:
                _swap_gain(i, -1, r_x0[r] + (sp + w / 2.0) * r_sw[r], r_y[r] + hgt[i] / 2,
                           r_sign[r], 0.0, 0.0, 1.0, N, bx, by, osign, stamp, tick, True)
                a_ = wum * hgt[i]
                use[min(max(int((bx[i] - dx0) / dbw), 0), dnx - 1),
                    min(max(int((by[i] - dy0) / dbh), 0), dny - 1)] -= a_
                use[min(max(int((r_x0[r] + (sp + w / 2.0) * r_sw[r] - dx0) / dbw), 0), dnx - 1),
                    min(max(int((r_y[r] + hgt[i] / 2 - dy0) / dbh), 0), dny - 1)] += a_
                for t in range(w):
                    occ[row_off[r0] + s0 + t] = -1
                for t in range(w):
                    occ[row_off[r] + sp + t] = i
                bx[i] = r_x0[r] + (sp + w / 2.0) * r_sw[r]
                by[i] = r_y[r] + hgt[i] / 2
                osign[i] = r_sign[r]
            row_of_cell[i], site_of_cell[i] = r, sp
            total += best
            moves += 1
    return total, moves


@njit(cache=True)
def _adjacent_swap(seq_start, seq, wum, bx, by, osign, N, passes):
    """Swap neighbouring cells of a segment (the pair keeps its span) on a strict gain."""
    stamp = np.zeros(len(N[0]) - 1, np.int64)
    tick = 0
    total = 0.0
    swaps = 0
    for _p in range(passes):
        for s in range(len(seq_start) - 1):
            for t in range(seq_start[s], seq_start[s + 1] - 1):
                a = seq[t]
                b = seq[t + 1]
                left = bx[a] - wum[a] / 2
                right = bx[b] + wum[b] / 2
                nbx = left + wum[b] / 2
                nax = right - wum[a] / 2
                tick += 1
                g = _swap_gain(a, b, nax, by[a], osign[a], nbx, by[b], osign[b], N, bx, by,
                               osign, stamp, tick, False)
                if g > 1e-9:
                    tick += 1
                    _swap_gain(a, b, nax, by[a], osign[a], nbx, by[b], osign[b], N, bx, by,
                               osign, stamp, tick, True)
                    bx[a] = nax
                    bx[b] = nbx
                    seq[t] = b
                    seq[t + 1] = a
                    total += g
                    swaps += 1
    return total, swaps


def detailed_place(design: Design, fp: Floorplan, cells: np.ndarray | None = None, *,
                   passes: int = 8, max_degree: int = 64, min_gain: float = 0.002,
                   target_density: float = 1.0, keep: np.ndarray | None = None,
                   avoid: np.ndarray | None = None, frozen: np.ndarray | None = None
                   ) -> tuple[Floorplan, dict]:
    """Lower the HPWL of a row-legal placement by cell swaps that keep it legal.

    Parameters
    ----------
    design : Design
    fp : Floorplan
        Cells already on rows and sites (:func:`legalize_cells`); not modified.
    cells : (n,) bool, optional
        Cells that may move (default :func:`cell_mask`).
    passes : int
        Most passes of global moves (then two of adjacent swaps).
    min_gain : float
        Stop once a pass lowers the HPWL by less than this fraction.
    target_density : float
        A cell moves into another density bin (the report's grid) only while that bin's cell
        area stays within this share of its row area (the maximum density under a partial
        blockage, where lower), so detailed placement does not pile
        cells up where the global placement spread them (swaps of equal widths are always
        allowed: they change no bin's fill).
    max_degree : int
        Nets with more pins are left out of the optimal-region estimate (their gains are still
        counted exactly).
    keep, avoid : (k, 4) arrays, optional
        Free sites only inside ``keep`` or only outside ``avoid`` (cell regions; as
        :func:`legalize_cells`).
    frozen : bool array of the report's bin grid, optional
        Bins whose cell area may not grow (routing hot spots the spreading opened up: the
        moves that lower wirelength would fill them again).

    Returns
    -------
    (Floorplan, dict)
        The new floorplan and ``dp_gain`` (µm of HPWL saved), ``dp_swaps``.
    """
    cells = cell_mask(design, fp) if cells is None else np.asarray(cells, bool)
    idx = np.flatnonzero(cells)
    out = fp.copy()
    if len(idx) < 2 or design.num_nets == 0:
        return out, {"dp_gain": 0.0, "dp_swaps": 0}
    w, h = fp.sizes()
    bx = (fp.x + w / 2).astype(np.float64)
    by = (fp.y + h / 2).astype(np.float64)
    # pin offsets: x as oriented now; y given for N and flipped by a sign for FS cells
    pb = design.pin_block
    pdx, pdy = orient_offsets(design.pin_dx, design.pin_dy, fp.orient[pb])
    fs = fp.orient == ORIENT_CODE["FS"]
    osign = np.ones(design.num_blocks)
    osign[cells & fs] = -1.0
    pdy = np.where((cells & fs)[pb], -pdy, pdy)  # N-orientation y offset for the moving cells
    pdx = np.ascontiguousarray(pdx)
    pdy = np.ascontiguousarray(pdy)
    # nets of every block (CSR)
    pn = design.pin_net
    o = np.argsort(pb, kind="stable")
    bnets = np.ascontiguousarray(pn[o])
    bnet_s = np.concatenate([[0], np.cumsum(np.bincount(pb, minlength=design.num_blocks))])
    ns = design.net_start
    # every net's pin bounding box, kept up to date by the kernels
    px = bx[pb] + pdx
    py = by[pb] + osign[pb] * pdy
    st = ns[:-1]
    bb = np.stack([np.minimum.reduceat(px, st), np.maximum.reduceat(px, st),
                   np.minimum.reduceat(py, st), np.maximum.reduceat(py, st)], axis=1)
    N = (ns, pb, pdx, pdy, bnet_s, bnets, o.astype(np.int64), np.ascontiguousarray(bb))
    # every site of every row: the cell on it, -1 free, -2 blocked
    seg = row_segments(design, fp, cells, keep=keep, avoid=avoid)
    nsites = design.row_num_sites.astype(np.int64)
    row_off = np.concatenate([[0], np.cumsum(nsites)]).astype(np.int64)
    if row_off[-1] > MAX_SITES:
        return out, {"dp_gain": 0.0, "dp_swaps": 0}
    occ = np.full(int(row_off[-1]), -2, np.int64)
    seg_rows = row_of(design, seg.x0 + seg.lo * seg.site, seg.y, seg.site)[0]
    _fill_runs(occ, row_off[seg_rows] + seg.lo, seg.hi - seg.lo, np.full(len(seg.lo), -1))
    r_of, off_site = row_of(design, fp.x[idx], fp.y[idx], w[idx])
    if (r_of < 0).any() or off_site.any():
        raise PlacementError("detailed placement needs every cell on a row site; legalise first")
    sw = design.row_site_width[r_of]
    site = np.round((fp.x[idx] - design.row_x[r_of]) / sw).astype(np.int64)
    wsite = np.zeros(design.num_blocks, np.int64)
    wsite[idx] = np.ceil(w[idx] / sw - 1e-9).astype(np.int64)
    _fill_runs(occ, row_off[r_of] + site, wsite[idx], idx.astype(np.int64))
    row_of_cell = np.full(design.num_blocks, -1, np.int64)
    site_of_cell = np.zeros(design.num_blocks, np.int64)
    row_of_cell[idx] = r_of
    site_of_cell[idx] = site
    r_sign = np.where(design.row_orient == ORIENT_CODE["FS"], -1.0, 1.0)
    rows_by_y = np.argsort(design.row_y, kind="stable").astype(np.int64)
    order = idx[np.lexsort((bx[idx], by[idx]))]
    nbuf = 2 * int(np.diff(bnet_s).max()) + 2
    # density bins (the report's grid): usage by cell centres, capacity = target x row area
    g = bin_grid(design)
    i_, j_ = g.locate(bx[idx], by[idx])
    use = np.zeros(g.shape)
    np.add.at(use, (i_, j_), (wsite[idx] * sw) * h[idx])
    segr = np.stack([seg.x0 + seg.lo * seg.site, seg.y, seg.x0 + seg.hi * seg.site,
                     seg.y + seg.height], axis=1)
    cap = target_density * rect_area_map(g, segr)  # the segments hold the cells' sites too
    cap = np.maximum(cap - partial_capacity_loss(design, g, target_density), 0.0)
    if frozen is not None:
        cap = np.where(frozen, np.minimum(cap, use), cap)
    D = (use, cap, g.xlo, g.ylo, g.bw, g.bh)
    hpwl0 = hpwl(design, fp)
    g1 = 0.0
    n1 = 0
    for _p in range(passes):  # until a pass saves less than min_gain of what is left
        g, k = _global_moves(order, wsite, bx, by, h.astype(np.float64), osign, row_of_cell,
                             site_of_cell, occ, row_off, design.row_x, design.row_site_width,
                             design.row_y, nsites, r_sign, rows_by_y, N, max_degree, 1, nbuf,
                             3, 24, 12, D)
        g1 += g
        n1 += k
        if g < min_gain * max(hpwl0 - g1, 1e-12):
            break
    # adjacent swaps within each row (cells sorted by y, then x)
    o2 = idx[np.lexsort((bx[idx], by[idx]))]
    yl = by[o2]
    brk = np.flatnonzero(np.diff(yl) != 0) + 1
    # split also where cells are not abutting (a gap or an obstacle between them)
    wl = w[o2]
    gap = (bx[o2][1:] - wl[1:] / 2) - (bx[o2][:-1] + wl[:-1] / 2)
    brk = np.union1d(brk, np.flatnonzero(gap > 1e-6) + 1)
    # a cell whose width is not a whole number of sites is never swapped this way (the pair
    # would leave the site grid)
    sw = float(np.median(design.row_site_width)) if len(design.row_site_width) else 1.0
    frac = np.abs(wl / sw - np.round(wl / sw)) > 1e-6
    brk = np.union1d(brk, np.concatenate([np.flatnonzero(frac), np.flatnonzero(frac) + 1]))
    brk = brk[(brk > 0) & (brk < len(o2))]
    seq_start = np.concatenate([[0], brk, [len(o2)]]).astype(np.int64)
    g2, n2 = _adjacent_swap(seq_start, o2.copy(), w.astype(np.float64), bx, by, osign, N, 2)
    out.x[idx] = bx[idx] - w[idx] / 2
    out.y[idx] = by[idx] - h[idx] / 2
    out.orient[idx] = np.where(osign[idx] < 0, ORIENT_CODE["FS"], ORIENT_CODE["N"])
    return out, {"dp_gain": float(g1 + g2), "dp_swaps": int(n1 + n2)}

