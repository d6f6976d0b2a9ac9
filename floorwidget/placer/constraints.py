"""What hand-drawn constraints ask of the placer: partial placement blockages, cell regions.

Power straps on low layers are partial blockages too (at the grid's ``cell_density``:
:meth:`floorwidget.design.Design.partial_blockages`), so cells under a strap are capped the
same way.

A full blockage (maximum density 0) is an obstacle like a fixed macro: every placer stage
already takes its area out.  A *partial* blockage with maximum density ``d`` (DEF
``+ PARTIAL``, as a fraction) lets standard cells and clusters fill at most ``d`` of its area,
so a bin under it holds ``d`` instead of the target density there: its capacity loses
``max(0, target − d)`` times the covered area.  The spreading (look-ahead) and the density cap
of detailed placement both subtract this loss; the rows stage (legalisation and detailed
placement) sees ``1 − d`` of each partial blockage as blocked stripes (:func:`partial_stripes`),
so the cap holds per blockage after ``place``.  Macros are not kept off partial blockages.

Cell regions (:class:`floorwidget.design.CellRegions`): :class:`RegionPlan` makes the
spreading keep fence members inside their fence and everyone else out, and pulls guide
members toward their guide; :func:`row_groups` splits the rows stage so that each fence's
cells are legalised on the rows inside it and the rest outside all fences;
:func:`macro_keepouts` keeps macros off full blockages and fences.
"""

from __future__ import annotations

import numpy as np

from ..design import FENCE, GUIDE, CellRegions, Design
from ..metrics import BinGrid, rect_area_map

__all__ = ["RegionPlan", "clamp_to_regions", "macro_keepouts", "partial_capacity_loss",
           "partial_stripes", "row_groups"]


def macro_keepouts(design: Design) -> np.ndarray:
    """``(k, 4)`` rectangles macro footprints must stay off: full placement blockages and
    fences (a fence holds its own cells only)."""
    reg = design.regions
    fences = reg.rects[np.isin(reg.rect_region(), np.flatnonzero(reg.kind == FENCE))] \
        if len(reg) else np.zeros((0, 4))
    full = design.full_blockages
    return np.concatenate([full, fences]) if len(fences) else full


def partial_capacity_loss(design: Design, grid: BinGrid, target: float) -> np.ndarray:
    """``(nx, ny)`` capacity (µm²) that the partial blockages take from each bin at density
    ``target``: ``Σ max(0, target − d_k) × area of blockage k in the bin``.  Overlaps with
    other obstacles are counted again (callers clip the capacity at zero)."""
    rects, md = design.partial_blockages()
    loss = np.maximum(float(target) - md, 0.0)
    keep = loss > 0.0
    if not keep.any():
        return np.zeros(grid.shape)
    return np.maximum(rect_area_map(grid, rects[keep], loss[keep]), 0.0)


STRIPE_CELLS = 4.0  # a free stripe under a partial blockage holds at least this many cells
MAX_STRIPES = 256   # ... and a blockage has at most this many (wider ones get wider stripes)


def partial_stripes(design: Design, cell_width: float) -> np.ndarray:
    """``(s, 4)`` rectangles that the rows stage treats as blocked so that standard cells fill
    at most ``d`` of every partial blockage of maximum density ``d``.

    Each partial blockage is cut into ``k`` equal periods across x, each a free stripe of
    ``d`` of its width followed by a blocked stripe of the rest, all of the blockage's
    height; ``k`` is as large as keeps each free stripe at least :data:`STRIPE_CELLS` cells of
    ``cell_width`` wide (one period when the blockage is narrower), at most
    :data:`MAX_STRIPES`.  The rows cut blocked stripes outward to whole sites, so the free
    area under a blockage is at most ``d`` of its area and no legal row placement can exceed
    the cap (the spreading budgets the same share through :func:`partial_capacity_loss`).
    """
    rects, md = design.partial_blockages()
    sel = np.flatnonzero((md > 0.0) & (md < 1.0))
    if not len(sel):
        return np.zeros((0, 4))
    b, d = rects[sel], md[sel]
    width = b[:, 2] - b[:, 0]
    free_min = STRIPE_CELLS * max(float(cell_width), 1e-9)
    k = np.clip(np.floor(width * d / free_min), 1, MAX_STRIPES).astype(np.int64)
    i = np.repeat(np.arange(len(sel)), k)
    j = np.arange(int(k.sum())) - np.repeat(np.cumsum(k) - k, k)
    period = width[i] / k[i]
    x0 = b[i, 0] + j * period + d[i] * period
    x1 = b[i, 0] + (j + 1) * period
    return np.stack([x0, b[i, 1], x1, b[i, 3]], axis=1)


# ---------------------------------------------------------------------------------------------
# cell regions: fences (members inside, everyone else outside) and guides (a pull)


def clamp_to_regions(cx, cy, hw, hh, reg, regions: CellRegions):
    """Centres ``cx, cy`` of objects with half-sizes ``hw, hh`` moved into the nearest
    rectangle of their region ``reg`` (the least move; an object wider than a rectangle is
    centred on it along that axis).  Vectorised over the (object, rectangle) pairs."""
    n = len(cx)
    if n == 0:
        return np.zeros(0), np.zeros(0)
    rs = regions.rect_start
    cnt = rs[reg + 1] - rs[reg]
    obj = np.repeat(np.arange(n), cnt)
    first = np.repeat(np.cumsum(cnt) - cnt, cnt)
    b = regions.rects[rs[reg][obj] + (np.arange(len(obj)) - first)]

    def axis(c, half, lo, hi):
        a, z = lo + half, hi - half
        mid = (lo + hi) / 2
        return np.where(z >= a, np.clip(c, a, np.maximum(z, a)), mid)

    px = axis(cx[obj], hw[obj], b[:, 0], b[:, 2])
    py = axis(cy[obj], hh[obj], b[:, 1], b[:, 3])
    d = (px - cx[obj]) ** 2 + (py - cy[obj]) ** 2
    order = np.lexsort((d, obj))
    best = order[np.concatenate([[0], np.flatnonzero(np.diff(obj[order])) + 1])]
    return px[best], py[best]


class RegionPlan:
    """How one spreading problem honours the cell regions of its variables.

    After Gu, Jiang, Lin, Pan (ICCAD 2020; from memory): the members of each fence spread
    against a density map of their own, the capacity of the bins inside the fence, and every
    other object against the capacity outside all fences; after each solve, fence members are
    clamped into their fence (region constraints as bounds).  Guide members get an extra
    anchor toward the nearest point of their guide while they are outside it (the pull), so
    wirelength may keep some of them out.

    Attributes
    ----------
    active : bool
        Whether any variable is in a region (else the plan does nothing).
    groups : list of (idx, cap)
        Variable positions and the capacity map each group spreads against.
    """

    def __init__(self, design: Design, vars_: np.ndarray, grid: BinGrid, cap: np.ndarray):
        reg = design.regions
        self.regions = reg
        self.reg = reg.member[vars_] if len(reg) else np.full(len(vars_), -1, np.int32)
        kind = reg.kind[np.maximum(self.reg, 0)] if len(reg) else np.zeros(len(vars_))
        self.fence = (self.reg >= 0) & (kind == FENCE)
        self.guide = (self.reg >= 0) & (kind == GUIDE)
        fences = np.flatnonzero(reg.kind == FENCE) if len(reg) else np.zeros(0, np.int64)
        self.active = bool(self.guide.any() or (len(fences) and len(vars_)))
        self.groups: list[tuple[np.ndarray, np.ndarray]] = []
        if not len(fences):
            return
        inside = np.zeros(grid.shape)
        for k in fences:
            share = np.minimum(rect_area_map(grid, reg.rects_of(k)) / grid.bin_area, 1.0)
            inside += share
            idx = np.flatnonzero(self.fence & (self.reg == k))
            if len(idx):
                self.groups.append((idx, cap * share))
        rest = np.flatnonzero(~self.fence)
        if len(rest):
            self.groups.append((rest, cap * np.clip(1.0 - inside, 0, 1)))

    def clamp(self, cx, cy, w, h) -> None:
        """Fence members (positions among the variables) into their fence, in place."""
        f = np.flatnonzero(self.fence)
        if len(f):
            cx[f], cy[f] = clamp_to_regions(cx[f], cy[f], w[f] / 2, h[f] / 2, self.reg[f],
                                            self.regions)

    def pull(self, cx, cy, w, h, tx, ty, wx, wy, weight) -> None:
        """Merge a spring toward the nearest guide point into the anchors ``(tx, ty, wx,
        wy)`` of guide members outside their guide (two springs on one variable are one
        spring at their weighted mean with the summed weight), in place."""
        g = np.flatnonzero(self.guide)
        if not len(g):
            return
        gx, gy = clamp_to_regions(cx[g], cy[g], w[g] / 2, h[g] / 2, self.reg[g], self.regions)
        for t, wt, gc, c in ((tx, wx, gx, cx), (ty, wy, gy, cy)):
            dist = np.abs(gc - c[g])
            wg = np.where(dist > 1e-9, weight[g] / np.maximum(dist, 1e-9), 0.0)
            t[g] = (wt[g] * t[g] + wg * gc) / np.maximum(wt[g] + wg, 1e-300)
            wt[g] = wt[g] + wg

    def check(self, w, h, wt, design_name: str) -> None:
        """PlacementError naming the fence whose members do not fit its capacity."""
        from .errors import PlacementError  # noqa: PLC0415
        for idx, capg in self.groups:
            if not self.fence[idx[0]]:
                continue  # the objects outside every fence: checked with the whole core
            k = int(self.reg[idx[0]])
            need = float(np.sum(w[idx] * h[idx] * wt[idx]))
            have = float(capg.sum())
            if need > have * (1 + 1e-9):
                raise PlacementError(
                    f"design {design_name!r}: region {self.regions.names[k]!r}: its cells need "
                    f"{need:.6g} µm² at the target density but the fence holds {have:.6g} µm²; "
                    "enlarge the fence or raise target_density")


def row_groups(design: Design, cells: np.ndarray):
    """``(cells, keep, avoid)`` per group that rows legalise separately: each fence's members
    on the rows clipped to the fence (``keep``), then every other cell off all fences
    (``avoid``).  Without fences: one group, ``(cells, None, None)``."""
    reg = design.regions
    fences = np.flatnonzero(reg.kind == FENCE) if len(reg) else np.zeros(0, np.int64)
    if not len(fences):
        return [(cells, None, None)]
    out = []
    rest = cells.copy()
    for k in fences:
        mine = cells & (reg.member == k)
        rest &= ~mine
        if mine.any():
            out.append((mine, reg.rects_of(k), None))
    fence_rects = np.concatenate([reg.rects_of(k) for k in fences])
    out.append((rest, None, fence_rects))
    return out
