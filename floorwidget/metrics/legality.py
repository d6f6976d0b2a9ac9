"""Legality: macros under the halo rule, in the core, off blockages and on the grid; standard
cells on rows and sites and apart.

Legality uses the placed footprints.  The halo rule (common practice): a halo is a keep-out
around one macro -- no standard cell and no *other macro's footprint* inside it -- and halos
may overlap each other.  Two macros conflict when the footprint of one overlaps the halo box of
the other (fixed macros included); facing footprints must stand apart by the larger of the two
facing halos.  The rectangle rules themselves are :mod:`floorwidget.kernels.rects`, shared with
the macro legaliser.
"""

from __future__ import annotations

import numpy as np

from ..design import CELL, FIXED, MACRO, MOVABLE, Design, Floorplan, off_grid
from ..kernels.rects import TOL, halo_conflicts, overlap_pairs

__all__ = ["cell_legality", "illegal_blocks", "legality", "pinned_illegal", "row_of"]



def legality(design: Design, fp: Floorplan) -> dict:
    """Legality checks of a floorplan.

    Parameters
    ----------
    design : Design
    fp : Floorplan

    Returns
    -------
    dict
        ``overlap_pairs`` ((k, 2) int array of macro pairs in conflict under the halo rule:
        a footprint overlapping the other's halo box; fixed macros included),
        ``overlap_areas`` (k,), ``macro_overlaps`` (k), ``macro_overlap_area`` (µm², per pair
        the area of the union of its footprint-against-halo-box intersections),
        ``out_of_die`` (indices of blocks whose footprint leaves the die), ``out_of_core``
        (macros whose footprint leaves the core),
        ``on_blockage`` (macros whose footprint overlaps a placement blockage),
        ``off_grid`` (movable or pinned macros whose lower-left corner is off the snap grid;
        fixed macros come from the input and are exempt) and ``legal`` (none of these).
    """
    mac = np.flatnonzero(design.kind == MACRO)
    rects = fp.rects()
    halo_r = fp.rects(halo=True)[mac]
    a, b, area = halo_conflicts(rects[mac], halo_r, TOL)
    pairs = np.stack([mac[a], mac[b]], axis=1) if len(a) else np.zeros((0, 2), np.intp)
    d, c = design.die, design.core
    out_die = ((rects[:, 0] < d[0] - TOL) | (rects[:, 1] < d[1] - TOL)
               | (rects[:, 2] > d[2] + TOL) | (rects[:, 3] > d[3] + TOL))
    mr = rects[mac]
    out_core = ((mr[:, 0] < c[0] - TOL) | (mr[:, 1] < c[1] - TOL)
                | (mr[:, 2] > c[2] + TOL) | (mr[:, 3] > c[3] + TOL))
    bl = design.full_blockages
    on_bl = np.zeros(len(mac), bool)
    on_bl[overlap_pairs(mr, bl, TOL)[0]] = True
    g0, gp = design.grid_origin, design.grid_pitch
    offg = (off_grid(fp.x[mac], g0[0], gp[0]) | off_grid(fp.y[mac], g0[1], gp[1]))
    offg &= fp.status[mac] != FIXED
    res = {
        "overlap_pairs": pairs,
        "overlap_areas": area,
        "macro_overlaps": int(len(a)),
        "macro_overlap_area": float(area.sum()),
        "out_of_die": np.flatnonzero(out_die),
        "out_of_core": mac[out_core],
        "on_blockage": mac[on_bl],
        "off_grid": mac[offg],
    }
    res["legal"] = bool(len(a) == 0 and not out_die.any() and not out_core.any()
                        and not on_bl.any() and not offg.any())
    return res


def pinned_illegal(design: Design, fp: Floorplan, leg: dict | None = None) -> list[str]:
    """Names of the pinned or fixed macros that break legality on their own — outside the
    core, on a placement blockage, off the grid (pinned only), or in conflict with another
    non-movable macro — which no placer run can repair (it never moves them)."""
    leg = legality(design, fp) if leg is None else leg
    still = fp.status != MOVABLE
    bad = np.zeros(design.num_blocks, bool)
    for key in ("out_of_core", "on_blockage", "off_grid"):
        bad[leg[key]] = True
    pairs = leg["overlap_pairs"]
    if len(pairs):
        both = still[pairs[:, 0]] & still[pairs[:, 1]]
        bad[pairs[both].ravel()] = True
    bad &= still & (design.kind == MACRO)
    return [design.names[i] for i in np.flatnonzero(bad)]


def cell_legality(design: Design, fp: Floorplan) -> dict:
    """Row legality of the standard cells (soft clusters are not cells and are not checked).

    Parameters
    ----------
    design : Design
    fp : Floorplan

    Returns
    -------
    dict
        ``cells_off_row`` (movable or pinned cells whose bottom is not on the bottom of a row
        whose span holds the cell), ``cells_off_site`` (cells on a row whose left edge is not on
        one of its sites), ``cell_overlaps`` (pairs of cells overlapping by a positive area,
        plus pairs of a cell and a macro's halo box or a placement blockage it overlaps; fixed
        cells included), and ``cells_legal`` (all three zero).  Cells fixed by the input are
        exempt from the row and site checks, like fixed macros from the grid check.
    """
    cells = np.flatnonzero(design.kind == CELL)
    res = {"cell_overlaps": 0, "cells_off_row": 0, "cells_off_site": 0, "cells_legal": True}
    if not len(cells):
        return res
    r = fp.rects()
    chk = cells[fp.status[cells] != FIXED]
    if len(design.row_y):
        row, off_site = row_of(design, fp.x[chk], fp.y[chk], r[chk, 2] - r[chk, 0])
        off_row = row < 0
    else:
        off_row, off_site = np.ones(len(chk), bool), np.zeros(len(chk), bool)
    # obstacles: macro halo boxes and blockages
    mac = np.flatnonzero(design.kind == MACRO)
    obs = fp.rects(halo=True)[mac]
    if len(design.full_blockages):
        obs = np.concatenate([obs, design.full_blockages])
    rc = r[cells]
    bad_pairs = _banded_overlaps(rc) + _cross_overlaps(rc, obs)
    res.update(cell_overlaps=bad_pairs, cells_off_row=int(off_row.sum()),
               cells_off_site=int(off_site.sum()))
    res["cells_legal"] = not (bad_pairs or off_row.any() or off_site.any())
    return res


def _banded_overlaps(r: np.ndarray, tol: float = TOL) -> int:
    """Number of overlapping pairs among rectangles no taller than a few rows (cells).

    The plane is cut into horizontal bands as tall as the tallest rectangle, so each
    rectangle lies in at most two bands and two overlapping ones share a band; the x-sweep of
    :func:`floorwidget.kernels.rects.overlap_pairs` then runs per band (rectangles keyed by
    band, then left edge) and never pairs cells of far-apart rows.  A pair met in two bands is
    counted once.  Identical rectangles are counted as one with a multiplicity (``c`` copies
    overlap each other in ``c(c-1)/2`` pairs), so a floorplan with every cell at one spot costs
    O(n log n), not O(n²).
    """
    if len(r) < 2:
        return 0
    r, cnt = np.unique(r, axis=0, return_counts=True)
    cnt = cnt.astype(np.int64)
    solid = ((r[:, 2] - r[:, 0]) > tol) & ((r[:, 3] - r[:, 1]) > tol)
    same = int(np.sum((cnt * (cnt - 1) // 2)[solid]))
    n = len(r)
    if n < 2:
        return same
    hb = float(np.max(r[:, 3] - r[:, 1])) + tol
    b0 = np.floor(r[:, 1] / hb).astype(np.int64)
    b1 = np.floor((r[:, 3] - tol) / hb).astype(np.int64)
    two = b1 > b0
    idx = np.concatenate([np.arange(n), np.flatnonzero(two)])
    band = np.concatenate([b0, b1[two]])
    span = float(np.max(r[:, 2]) - np.min(r[:, 0])) + 1.0
    # one key per (band, x): shifting every band by the x span keeps bands apart in one sweep
    shift = (band - band.min()).astype(np.float64) * 2.0 * span
    rr = r[idx].copy()
    rr[:, 0] += shift
    rr[:, 2] += shift
    a, b = overlap_pairs(rr, tol=tol)
    ia, ib = idx[a], idx[b]
    keep = ia != ib
    pairs = np.unique(np.stack([np.minimum(ia, ib), np.maximum(ia, ib)], axis=1)[keep], axis=0)
    return same + int(np.sum(cnt[pairs[:, 0]] * cnt[pairs[:, 1]]))


def _cross_overlaps(cells: np.ndarray, obs: np.ndarray, tol: float = TOL) -> int:
    """Number of (cell, obstacle) pairs overlapping by more than ``tol`` along both axes."""
    return len(overlap_pairs(cells, obs, tol)[0])


def row_of(design: Design, x, y, w) -> tuple[np.ndarray, np.ndarray]:
    """The row holding each cell (lower-left ``x, y``, width ``w``), -1 when none does, and
    whether a cell on a row is off its sites; vectorised with one sorted key per row (row
    level, then x)."""
    order = np.lexsort((design.row_x, design.row_y))
    ry, rx = design.row_y[order], design.row_x[order]
    sw, ns = design.row_site_width[order], design.row_num_sites[order]
    levels = np.unique(ry)
    big = 4.0 * (float(np.max(np.abs(np.concatenate([rx + sw * ns, np.abs(x) + w])))) + 1.0)
    lv_row = np.searchsorted(levels, ry)
    li = np.clip(np.searchsorted(levels, y - TOL), 0, len(levels) - 1)
    on_level = np.abs(levels[li] - y) <= TOL
    key_r = lv_row * big + rx
    k = np.searchsorted(key_r, li * big + x + TOL, side="right") - 1
    k = np.clip(k, 0, len(ry) - 1)
    inside = (lv_row[k] == li) & (x >= rx[k] - TOL) & (x + w <= rx[k] + sw[k] * ns[k] + TOL)
    on_row = on_level & inside
    f = (x - rx[k]) / sw[k]
    off_site = on_row & (np.abs(f - np.round(f)) * sw[k] > TOL)
    return np.where(on_row, order[k], -1), off_site




def illegal_blocks(design: Design, fp: Floorplan, leg: dict | None = None) -> np.ndarray:
    """Mask over the blocks of the macros that :func:`legality` finds at fault.

    In conflict with another macro under the halo rule, outside the die or the core, on a
    placement blockage, or (movable and pinned macros only) off the snap grid.  The canvas and
    ``render`` both draw it.
    """
    leg = legality(design, fp) if leg is None else leg
    bad = np.zeros(design.num_blocks, bool)
    bad[np.asarray(leg["overlap_pairs"], np.intp).ravel()] = True
    for key in ("out_of_die", "out_of_core", "on_blockage", "off_grid"):
        bad[np.asarray(leg[key], np.intp)] = True
    return bad & (design.kind == MACRO)
