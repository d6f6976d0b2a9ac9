"""What the flat and the multilevel flows share: checked inputs, the spreading problem
(:class:`SpreadStage`), the rows stage, and the finished floorplan.

A *stage* is one timed, reported step of a flow: it reads and writes ``info`` (``stage_seconds``,
``stage_iterations``) and calls ``progress(stage, fraction, info)``.  The flows
(:mod:`~floorwidget.placer.flow`, :mod:`~floorwidget.placer.multilevel`) are sequences of
these; this module imports neither of them.

References
----------
P. Spindler, U. Schlichtmann, F. M. Johannes, IEEE Trans. Computer-Aided Design of Integrated
Circuits and Systems 27(8), 2008 (Bound2Bound net model).
M.-C. Kim, D.-J. Lee, I. L. Markov, Proc. IEEE/ACM ICCAD 2010 (look-ahead legalisation with
anchor pseudo-nets).
"""

from __future__ import annotations

import time
import warnings
from collections.abc import Callable
from typing import Any

import numpy as np

from ..design import CELL, CLUSTER, MACRO, MOVABLE, TERMINAL, Design, Floorplan
from ..metrics import bin_grid, congestion_map, hpwl, pinned_illegal
from .constraints import RegionPlan, partial_capacity_loss, row_groups
from .detail import detailed_place
from .errors import PlacementError, PlacementWarning
from .legalize import legalize_macros
from .options import (
    PlacerOptions,
    anchor_growth_for,
    check_int,
    check_range,
    make_options,
    net_multipliers,
)
from .rows import cell_mask, legalize_cells
from .solve import QuadraticSystem
from .spread import (
    Grid,
    capacity_map,
    density_weight,
    lookahead,
    make_grid,
    overfilled_regions,
    overflow,
)
from .straps import clear_strap_channels

Progress = Callable[[str, float, dict], Any] | None


INFLATE_FROM = 0.25  # overflow below which routability-driven inflation starts ...
INFLATE_EVERY = 3    # ... and it is updated every this many spreading iterations
STALL_FROM = 0.3  # overflow below which a spreading loop that stops improving is stopped


DP_SLACK = 0.1  # detailed placement may fill a density bin this far above the target


DETAIL_PASSES = 8             # most detailed-placement passes by default ...


MULTILEVEL_DETAIL_PASSES = 2  # ... and in the multilevel flow (DEVELOPERS.md: 10^6 cells)


TARGET_MARGIN = 0.05  # added to the utilisation when the asked target density is too low


def check_inputs(design: Design, floorplan: Floorplan | None) -> Floorplan:
    if not isinstance(design, Design):
        raise TypeError(f"expected a Design, got {type(design).__name__}")
    fp = design.initial if floorplan is None else floorplan
    if not isinstance(fp, Floorplan):
        raise TypeError(f"expected a Floorplan, got {type(fp).__name__}")
    if len(fp.x) != design.num_blocks:
        raise ValueError(f"floorplan has {len(fp.x)} blocks, design {design.name!r} has "
                         f"{design.num_blocks}")
    return fp


def obstacles(design: Design, fp: Floorplan, fixed_mask: np.ndarray) -> np.ndarray:
    """Rectangles that take capacity away from the movable objects: fixed blocks (with their
    halos, terminals excluded) and placement blockages."""
    sel = fixed_mask & (design.kind != TERMINAL)
    r = fp.rects(halo=True)[sel]
    full = design.full_blockages
    if len(full):
        r = np.concatenate([r, full])
    return r


def report(progress: Progress, stage: str, frac: float, info: dict) -> None:
    if progress is not None:
        progress(stage, float(min(max(frac, 0.0), 1.0)), info)


class SpreadStage:
    """One spreading problem: a quadratic system, its bin grid and capacity."""

    def __init__(self, design: Design, fp: Floorplan, var_mask: np.ndarray, target: float,
                 opts: PlacerOptions, multiplier, box: np.ndarray | None = None):
        """``box`` (x0, y0, x1, y1; default the core): the area the objects are spread in,
        its bins the only ones made (a local refine's window: the cost follows the window,
        not the core)."""
        self.design = design
        self.sys = QuadraticSystem(design, var_mask, multiplier)
        self.vars = self.sys.blocks
        w, h = fp.sizes()
        self.w = w[self.vars]
        self.h = h[self.vars]
        fixed = np.ones(design.num_blocks, bool)
        fixed[self.vars] = False
        c = design.core if box is None else np.asarray(box, np.float64)
        self.grid: Grid = make_grid(c, self.w, self.h, opts.bin_size)
        self.obstacles = obstacles(design, fp, fixed)
        if box is not None:  # only what reaches into the box takes its room
            o = self.obstacles
            self.obstacles = o[(o[:, 0] < c[2]) & (o[:, 2] > c[0]) & (o[:, 1] < c[3])
                               & (o[:, 3] > c[1])]
        self.cap = np.maximum(capacity_map(self.grid, target, self.obstacles)
                              - partial_capacity_loss(design, self.grid, target), 0.0)
        self.wt = density_weight(self.grid, self.w, self.h, target)
        self.regions = RegionPlan(design, self.vars, self.grid, self.cap)
        self.soft = design.kind[self.vars] == CLUSTER
        self.growth = (anchor_growth_for(len(self.vars)) if opts.anchor_growth is None
                       else opts.anchor_growth)
        self.area = float(np.sum(self.w * self.h * self.wt))
        self.lo_x = c[0] + self.w / 2
        self.hi_x = np.maximum(c[2] - self.w / 2, self.lo_x)
        self.lo_y = c[1] + self.h / 2
        self.hi_y = np.maximum(c[3] - self.h / 2, self.lo_y)
        s = self.sys.pins_of_var
        self.anchor_scale = np.maximum(s, 1.0)
        self.eps_a = 0.25 * min(self.grid.bw, self.grid.bh)
        kind = design.kind[self.vars]
        self.cellish = (kind == CELL) | (kind == CLUSTER)
        self.infl = None  # routability inflation per object (inflate)
        self.cgrid = bin_grid(design)

    def inflate(self, cx, cy, orient, opts: PlacerOptions) -> float:
        """Routability-driven inflation (option ``congestion_target``): the cells and
        clusters in bins whose routing demand over supply exceeds the target grow by the
        ratio (at most 1.5 per call, ``max_inflation`` in all), while the inflated area fits
        the capacity; returns the congestion peak seen.  Cell inflation from routing demand:
        Kim, Hu, Lee, Markov, ICCAD 2011; Hsu, Chou, Lin, Chang, ICCAD 2011 (from memory)."""
        d = self.design
        if self.infl is None:
            self.infl = np.ones(len(self.vars))
            self.base_wt = self.wt.copy()
        fp = Floorplan(d, cx, cy, orient)  # centres; corners from the oriented sizes
        bw, bh = fp.sizes()
        fp.x, fp.y = cx - bw / 2, cy - bh / 2
        grid = self.cgrid
        cmap = congestion_map(d, fp, grid)
        v = self.vars
        i = np.clip(((cx[v] - grid.xlo) / grid.bw).astype(np.intp), 0, grid.nx - 1)
        j = np.clip(((cy[v] - grid.ylo) / grid.bh).astype(np.intp), 0, grid.ny - 1)
        ratio = np.clip(cmap[i, j] / opts.congestion_target, 1.0, 1.5)
        ratio[~self.cellish] = 1.0
        infl = np.minimum(self.infl * ratio, opts.max_inflation)
        # the inflated area must fit the capacity: shrink the extra where it would not
        base = self.w * self.h * self.base_wt
        room = 0.97 * float(self.cap.sum()) - float(base.sum())
        extra = float(np.sum(base * (infl - 1.0)))
        if extra > room:
            infl = 1.0 + (infl - 1.0) * max(room, 0.0) / extra
        self.infl = infl
        self.wt = self.base_wt * infl
        return float(cmap.max())

    def scale_area(self, sel: np.ndarray, factor: float) -> None:
        """Count the objects ``sel`` (a mask over :attr:`vars`) with ``factor`` times their
        area in the density (0: they take no room and are not spread)."""
        self.wt = np.where(sel, self.wt * factor, self.wt)
        self.area = float(np.sum(self.w * self.h * self.wt))

    def check_capacity(self, target: float) -> None:
        cap = float(self.cap.sum())
        if self.area > cap * (1 + 1e-9):
            raise PlacementError(
                f"design {self.design.name!r}: movable area {self.area:.6g} µm² exceeds "
                f"target density {target:g} × free core area ({cap:.6g} µm²); raise "
                f"target_density or free some area")
        self.regions.check(self.w, self.h, self.wt, self.design.name)

    def clamp(self, cx, cy):
        v = self.vars
        cx[v] = np.clip(cx[v], self.lo_x, self.hi_x)
        cy[v] = np.clip(cy[v], self.lo_y, self.hi_y)
        if self.regions.active:  # fence members into their fence (bounds)
            x, y = cx[v], cy[v]
            self.regions.clamp(x, y, self.w, self.h)
            cx[v], cy[v] = x, y

    def lookahead(self, cx, cy):
        """Look-ahead positions: only the overfilled regions are spread (density-driven);
        with fences, each fence's members against its own capacity and the rest outside."""
        v = self.vars
        groups = self.regions.groups or [(slice(None), self.cap)]
        tx, ty = np.empty(len(v)), np.empty(len(v))
        x, y = cx[v], cy[v]
        for idx, cap in groups:
            w, h, wt = self.w[idx], self.h[idx], self.wt[idx]
            regions = overfilled_regions(self.grid, cap, x[idx], y[idx], w, h, weight=wt)
            tx[idx], ty[idx] = lookahead(self.grid, cap, x[idx], y[idx], w, h,
                                         regions=regions, weight=wt, scale=self.soft[idx])
        return tx, ty

    def overflow(self, cx, cy) -> float:
        v = self.vars
        return overflow(self.grid, self.cap, cx[v], cy[v], self.w, self.h, self.wt)

    def wirelength(self, cx, cy, orient, opts, iterations, progress, stage):
        for k in range(iterations):
            nx, ny, _ = self.sys.solve(cx, cy, orient, rtol=opts.cg_tol,
                                       maxiter=4 * opts.cg_maxiter)
            cx[self.vars] = nx
            cy[self.vars] = ny
            self.clamp(cx, cy)
            report(progress, stage, 0.1 * (k + 1) / iterations, {"iteration": k + 1})

    def spread(self, cx, cy, orient, opts, *, k0: float, max_it: int, min_it: int,
               target_overflow: float, progress, stage: str) -> dict:
        """Look-ahead spreading loop; updates ``cx, cy`` in place and returns facts."""
        v = self.vars
        best = np.inf
        since = 0
        it = 0
        ov = self.overflow(cx, cy)
        history = [ov]
        tx = ty = None
        while it < max_it and (ov > target_overflow or it < min_it):
            tx, ty = self.lookahead(cx, cy)
            alpha = opts.anchor_weight * (1.0 + self.growth * (k0 + it))
            wx = alpha * self.anchor_scale / np.maximum(np.abs(cx[v] - tx), self.eps_a)
            wy = alpha * self.anchor_scale / np.maximum(np.abs(cy[v] - ty), self.eps_a)
            if self.regions.active:  # guide members outside their guide: pulled toward it
                self.regions.pull(cx[v], cy[v], self.w, self.h, tx, ty, wx, wy,
                                  alpha * self.anchor_scale)
            nx, ny, _ = self.sys.solve(cx, cy, orient, anchor=(tx, ty, wx, wy),
                                       rtol=opts.cg_tol, maxiter=opts.cg_maxiter)
            cx[v] = nx
            cy[v] = ny
            self.clamp(cx, cy)
            it += 1
            if (opts.max_inflation > 1.0 and it % INFLATE_EVERY == 0 and ov < INFLATE_FROM
                    and self.cellish.any()):
                self.inflate(cx, cy, orient, opts)
            ov = self.overflow(cx, cy)
            history.append(ov)
            report(progress, stage, 0.1 + 0.9 * it / max(max_it, 1),
                    {"iteration": it, "overflow": ov})
            if ov < best * 0.98:
                best = ov
                since = 0
            elif ov < STALL_FROM:  # far from spread, a slow start is not a stall
                since += 1
                if since >= opts.stall_iterations and it >= min_it:
                    break
        used_lookahead = False
        if ov > target_overflow and tx is not None:
            # not converged: the look-ahead placement is density-feasible, take it if better
            tx, ty = self.lookahead(cx, cy)
            ov_la = overflow(self.grid, self.cap, tx, ty, self.w, self.h, self.wt)
            if ov_la < ov:
                cx[v] = tx
                cy[v] = ty
                if self.regions.active:
                    self.clamp(cx, cy)
                ov = ov_la
                used_lookahead = True
        return {"iterations": it, "overflow": ov, "history": history,
                "used_lookahead": used_lookahead,
                "bins": (self.grid.nx, self.grid.ny)}


def write_back(out: Floorplan, cx, cy, idx: np.ndarray) -> None:
    w, h = out.sizes()
    out.x[idx] = cx[idx] - w[idx] / 2
    out.y[idx] = cy[idx] - h[idx] / 2


def movable_macro_indices(design: Design, fp: Floorplan) -> np.ndarray:
    return np.flatnonzero((fp.status == MOVABLE) & (design.kind == MACRO))


def soft_mask(design: Design, fp: Floorplan) -> np.ndarray:
    return (fp.status == MOVABLE) & ((design.kind == CELL) | (design.kind == CLUSTER))


def restore_fixed(out: Floorplan, src: Floorplan) -> None:
    """Guarantee that nothing but MOVABLE non-terminal blocks changed (bit-exact)."""
    keep = (src.status != MOVABLE) | (src.design.kind == TERMINAL)
    out.x[keep] = src.x[keep]
    out.y[keep] = src.y[keep]
    out.orient[keep] = src.orient[keep]
    out.status[:] = src.status


def start(design: Design, floorplan: Floorplan | None, target_density: float, seed: int,
           options: dict) -> tuple[Floorplan, float, Any, Any]:
    """Checked inputs of place and refine: floorplan, target density, options, net factors."""
    src = check_inputs(design, floorplan)
    target = check_range("target_density", target_density, 0.0, 1.0, lo_open=True)
    check_int("seed", seed, 0, 2**32 - 1)
    opts = make_options(options)
    target = fitting_target(design, src, target)
    return src, target, opts, net_multipliers(design, opts.net_weight_scale)


def utilisation(design: Design, fp: Floorplan) -> float:
    """Movable area (macros, clusters, cells; not terminals) ÷ the core area left free by
    fixed and pinned blocks (with their halos) and placement blockages."""
    movable = (fp.status == MOVABLE) & (design.kind != TERMINAL)
    area = float(np.sum(design.width[movable] * design.height[movable]))
    c = design.core
    grid = make_grid(c, np.ones(1), np.ones(1), bin_size=max(c[2] - c[0], c[3] - c[1]) / 256)
    free = float(np.maximum(capacity_map(grid, 1.0, obstacles(design, fp, ~movable))
                            - partial_capacity_loss(design, grid, 1.0), 0.0).sum())
    return area / free if free > 0 else (np.inf if area > 0 else 0.0)


def fitting_target(design: Design, fp: Floorplan, target: float) -> float:
    """The target density to use: ``target``, or the utilisation plus
    :data:`TARGET_MARGIN` (at most 1.0, with a warning) when the design is fuller than that.

    Raises
    ------
    PlacementError
        When the movable area does not fit the free core area even at density 1.0.
    """
    u = utilisation(design, fp)
    if u <= target:
        return target
    if u > 1.0 + 1e-9:
        movable = (fp.status == MOVABLE) & (design.kind != TERMINAL)
        need = float(np.sum(design.width[movable] * design.height[movable]))
        c = design.core
        free = need / u if u < 1e9 else 0.0  # (round-off of a core all but blocked reads 0)
        share = f" (utilisation {u:.1%})" if u < 100.0 else ""  # (no 5e16 % when all blocked)
        raise PlacementError(f"design {design.name!r}: movable blocks need {need:.6g} µm² but "
                             f"the core of {(c[2] - c[0]) * (c[3] - c[1]):.6g} µm² has "
                             f"{free:.6g} µm² left free by placement blockages "
                             f"and fixed or pinned blocks{share}; it cannot fit even at target "
                             "density 1.0")
    used = min(1.0, u + TARGET_MARGIN)
    warnings.warn(f"design {design.name!r}: utilisation {u:.3f} exceeds target_density "
                  f"{target:g}; placing at {used:.3f}", PlacementWarning, stacklevel=4)
    return used


def rows_stage(design: Design, out: Floorplan, src: Floorplan, opts: PlacerOptions,
                target: float, info: dict, progress: Progress,
                only: np.ndarray | None = None) -> Floorplan:
    """Standard cells onto rows and sites (Abacus), then swap-based detailed placement, when
    ``cells="legal"``; timed and reported as the stages ``"rows"`` and ``"detail"``.  With
    ``only`` (a block mask) just those cells move; the others are obstacles where they are."""
    if only is None:  # (a local refine skips the whole-design figure)
        if design.power is not None and opts.legalize_macros:  # the last macro moves
            out, info["straps_blocked"] = clear_strap_channels(
                design, out, movable_macro_indices(design, src))
        info["hpwl_global"] = hpwl(design, out)
    if opts.cells != "legal":
        return out
    cells = cell_mask(design, src) if only is None else cell_mask(design, src) & only
    if not cells.any():
        return out
    if not len(design.row_y):
        warnings.warn(f"design {design.name!r} has standard cells but no rows; they stay at "
                      "their global positions", PlacementWarning, stacklevel=4)
        return out
    t0 = time.perf_counter()
    groups = row_groups(design, cells)  # one, or each fence and the rest apart
    got = []
    for grp, keep, avoid in groups:
        out, facts = legalize_cells(design, out, grp, keep=keep, avoid=avoid, free=cells)
        got.append(facts)
    info.update(merge_facts(got, "cells_legalized", "cell_displacement",
                             "cell_max_displacement"))
    info["stage_seconds"]["rows"] = time.perf_counter() - t0
    report(progress, "rows", 1.0, {})
    passes = opts.detail_passes
    if passes is None:
        passes = MULTILEVEL_DETAIL_PASSES if "levels" in info else DETAIL_PASSES
    if passes:
        t0 = time.perf_counter()
        frozen = None
        if opts.max_inflation > 1.0 and only is None:  # keep open the hot spots spread apart
            frozen = congestion_map(design, out) > opts.congestion_target
        if "field_density" in info:  # keep the room the field left for routing
            target = min(target, info["field_density"])
        got = []
        for grp, keep, avoid in groups:
            out, facts = detailed_place(design, out, grp, passes=passes,
                                        target_density=min(1.0, target + DP_SLACK),
                                        keep=keep, avoid=avoid, frozen=frozen)
            got.append(facts)
        info.update({"dp_gain": float(sum(f["dp_gain"] for f in got)),
                     "dp_swaps": int(sum(f["dp_swaps"] for f in got))})
        info["stage_seconds"]["detail"] = time.perf_counter() - t0
        report(progress, "detail", 1.0, {})
    return out


def merge_facts(facts: list[dict], count: str, mean: str, peak: str) -> dict:
    """Facts of row legalisation over several groups: counts summed, the mean weighted by
    count, the maximum of maxima (one group: its facts unchanged)."""
    if len(facts) == 1:
        return facts[0]
    n = sum(f[count] for f in facts)
    return {count: n, mean: sum(f[mean] * f[count] for f in facts) / max(n, 1),
            peak: max(f[peak] for f in facts)}


def legalize_stage(design: Design, fp: Floorplan, macros, info: dict,
                    progress: Progress) -> Floorplan:
    """Macro legalisation as a timed, reported stage of place and refine."""
    t0 = time.perf_counter()
    out = legalize_macros(design, fp, macros=macros)
    info["stage_seconds"]["legalize"] = time.perf_counter() - t0
    report(progress, "legalize", 1.0, {})
    return out


def finish(design: Design, out: Floorplan, src: Floorplan, info: dict, legalized: bool,
            overflow: float, t_all: float, target: float, seed: int) -> Floorplan:
    """The result: input statuses, non-movable blocks copied back bit-exact, facts in info."""
    out = Floorplan(design, out.x, out.y, out.orient, src.status)
    restore_fixed(out, src)
    info["legalized"] = legalized
    info["overflow"] = overflow
    info["iterations"] = int(sum(info["stage_iterations"].values()))
    info["seconds"] = time.perf_counter() - t_all
    info["target_density"] = target
    info["seed"] = int(seed)
    out.info = info
    warn_pinned(design, out)
    return out


def warn_pinned(design: Design, fp: Floorplan) -> None:
    """Say so when pinned or fixed macros keep the result from being legal (the placer never
    moves them); the names also go to ``fp.info["pinned_illegal"]``."""
    if not (fp.status != MOVABLE).any():
        return
    bad = pinned_illegal(design, fp)
    fp.info["pinned_illegal"] = bad
    if bad:
        more = f" and {len(bad) - 3} more" if len(bad) > 3 else ""
        warnings.warn(f"design {design.name!r}: pinned or fixed macro(s) "
                      f"{', '.join(map(repr, bad[:3]))}{more} are outside the core, on a "
                      "blockage, off the grid or overlapping each other; the floorplan cannot "
                      "be legal until they move", PlacementWarning, stacklevel=3)
