"""Standard-cell legalisation onto rows and sites (Abacus); the swap-based detailed placement is
:mod:`floorwidget.placer.detail`.

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

The kernel is sequential by nature and compiled with numba; every array they take is built
with vectorised numpy.  Soft clusters are not legalised (they stand for many cells).  Multi-row
cells (taller than 1.5 rows) are not handled and are left where the global placement put them.

The results are early-floorplanning estimates; sign-off belongs to the implementation flow.

References
----------
P. Spindler, U. Schlichtmann, F. M. Johannes, "Abacus: fast legalization of standard cell
circuits with minimal movement", ISPD 2008.
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
)
from ..metrics import rect_area_map
from .constraints import partial_stripes
from .errors import PlacementError

__all__ = ["RowSegments", "row_segments", "legalize_cells", "cell_mask"]

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
    if len(design.partial_blockages()[0]):
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
    return cell_seg, _final_sites(cell_seg, cell_ord, count, top, c_x, c_first, c_prev, s_site,
                                  wum), -1


@njit(cache=True)
def _final_sites(cell_seg, cell_ord, count, top, c_x, c_first, c_prev, s_site, wum):
    """Every placed cell's site: each segment's clusters walked from the top down."""
    n = len(cell_seg)
    k = len(count)
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
    return site_of


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
