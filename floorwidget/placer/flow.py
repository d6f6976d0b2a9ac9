"""The placement flow: global quadratic placement, macro orientation and legalisation, and the
re-spread of standard cells and soft clusters around the placed macros.

* :func:`place` — from scratch: every movable block (macros included) is placed by Bound2Bound
  quadratic placement with look-ahead spreading; movable macros then get their orientation and
  a legal spot, and the cells and clusters are spread again around them.
* :func:`refine` — warm-started after a hand edit: movable macros are legalised from where they
  are (minimal displacement) and cells/clusters are re-spread briefly from their positions.
* :func:`legalize` — macro legalisation only.

All three are pure: they return a new :class:`~floorwidget.design.Floorplan`, never touch the
input, never move a PINNED or FIXED block (bit-exact) nor an I/O terminal, and give bit-identical
results for the same inputs and seed.  The placement is an early-floorplanning estimate; detailed
placement, timing and sign-off checks belong to the full implementation flow.

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
from ..metrics import default_channel, hpwl, pinned_illegal
from .constraints import RegionPlan, partial_capacity_loss, row_groups
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
from .orient import choose_orientations
from .periphery import (
    close_channels,
    compact,
    fill_pockets,
    orient_mask_inward,
    push_to_edges,
)
from .rows import cell_mask, detailed_place, legalize_cells
from .solve import QuadraticSystem, spectral_coordinates
from .spread import (
    Grid,
    capacity_map,
    density_weight,
    lookahead,
    make_grid,
    overfilled_regions,
    overflow,
)

__all__ = ["place", "refine", "legalize"]

Progress = Callable[[str, float, dict], Any] | None
STALL_FROM = 0.3  # overflow below which a spreading loop that stops improving is stopped
REFINE_DETAIL_PASSES = 1  # refine is the quick clean-up after a hand edit (aes: 0.63 -> 0.24 s)
DP_SLACK = 0.1  # detailed placement may fill a density bin this far above the target
DETAIL_PASSES = 8             # most detailed-placement passes by default ...
MULTILEVEL_DETAIL_PASSES = 2  # ... and in the multilevel flow (DEVELOPERS.md: 10^6 cells)


# ---------------------------------------------------------------------------------------------
# helpers


def _check_inputs(design: Design, floorplan: Floorplan | None) -> Floorplan:
    if not isinstance(design, Design):
        raise TypeError(f"expected a Design, got {type(design).__name__}")
    fp = design.initial if floorplan is None else floorplan
    if not isinstance(fp, Floorplan):
        raise TypeError(f"expected a Floorplan, got {type(fp).__name__}")
    if len(fp.x) != design.num_blocks:
        raise ValueError(f"floorplan has {len(fp.x)} blocks, design {design.name!r} has "
                         f"{design.num_blocks}")
    return fp


def _obstacles(design: Design, fp: Floorplan, fixed_mask: np.ndarray) -> np.ndarray:
    """Rectangles that take capacity away from the movable objects: fixed blocks (with their
    halos, terminals excluded) and placement blockages."""
    sel = fixed_mask & (design.kind != TERMINAL)
    r = fp.rects(halo=True)[sel]
    full = design.full_blockages
    if len(full):
        r = np.concatenate([r, full])
    return r


def _report(progress: Progress, stage: str, frac: float, info: dict) -> None:
    if progress is not None:
        progress(stage, float(min(max(frac, 0.0), 1.0)), info)


class _Stage:
    """One spreading problem: a quadratic system, its bin grid and capacity."""

    def __init__(self, design: Design, fp: Floorplan, var_mask: np.ndarray, target: float,
                 opts: PlacerOptions, multiplier):
        self.design = design
        self.sys = QuadraticSystem(design, var_mask, multiplier)
        self.vars = self.sys.blocks
        w, h = fp.sizes()
        self.w = w[self.vars]
        self.h = h[self.vars]
        fixed = np.ones(design.num_blocks, bool)
        fixed[self.vars] = False
        self.grid: Grid = make_grid(design.core, self.w, self.h, opts.bin_size)
        self.obstacles = _obstacles(design, fp, fixed)
        self.cap = np.maximum(capacity_map(self.grid, target, self.obstacles)
                              - partial_capacity_loss(design, self.grid, target), 0.0)
        self.wt = density_weight(self.grid, self.w, self.h, target)
        self.regions = RegionPlan(design, self.vars, self.grid, self.cap)
        self.soft = design.kind[self.vars] == CLUSTER
        self.growth = (anchor_growth_for(len(self.vars)) if opts.anchor_growth is None
                       else opts.anchor_growth)
        self.area = float(np.sum(self.w * self.h * self.wt))
        c = design.core
        self.lo_x = c[0] + self.w / 2
        self.hi_x = np.maximum(c[2] - self.w / 2, self.lo_x)
        self.lo_y = c[1] + self.h / 2
        self.hi_y = np.maximum(c[3] - self.h / 2, self.lo_y)
        s = self.sys.pins_of_var
        self.anchor_scale = np.maximum(s, 1.0)
        self.eps_a = 0.25 * min(self.grid.bw, self.grid.bh)

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
            _report(progress, stage, 0.1 * (k + 1) / iterations, {"iteration": k + 1})

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
            ov = self.overflow(cx, cy)
            history.append(ov)
            _report(progress, stage, 0.1 + 0.9 * it / max(max_it, 1),
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


def _write_back(out: Floorplan, cx, cy, idx: np.ndarray) -> None:
    w, h = out.sizes()
    out.x[idx] = cx[idx] - w[idx] / 2
    out.y[idx] = cy[idx] - h[idx] / 2


def _movable_macros(design: Design, fp: Floorplan) -> np.ndarray:
    return np.flatnonzero((fp.status == MOVABLE) & (design.kind == MACRO))


def _soft_mask(design: Design, fp: Floorplan) -> np.ndarray:
    return (fp.status == MOVABLE) & ((design.kind == CELL) | (design.kind == CLUSTER))


def _restore_fixed(out: Floorplan, src: Floorplan) -> None:
    """Guarantee that nothing but MOVABLE non-terminal blocks changed (bit-exact)."""
    keep = (src.status != MOVABLE) | (src.design.kind == TERMINAL)
    out.x[keep] = src.x[keep]
    out.y[keep] = src.y[keep]
    out.orient[keep] = src.orient[keep]
    out.status[:] = src.status


# ---------------------------------------------------------------------------------------------
# public flow


def place(design: Design, floorplan: Floorplan | None = None, *, target_density: float = 0.8,
          seed: int = 0, progress: Progress = None, **options: Any) -> Floorplan:
    """Place every movable block from scratch around the pinned and fixed ones.

    Parameters
    ----------
    design : Design
    floorplan : Floorplan, optional
        Supplies statuses (PINNED/FIXED blocks stay where they are) and the orientations to
        start from; positions of movable blocks are ignored.  Default ``design.initial``.
    target_density : float
        Fraction of each bin's free area the movable objects may fill, in (0, 1]; raised to
        the design's utilisation + :data:`TARGET_MARGIN` (at most 1, with a
        :class:`PlacementWarning`) when the design is fuller than that.
    seed : int
        Seeds the small initial jitter; same inputs and seed give bit-identical output.
    progress : callable, optional
        ``progress(stage, fraction, info)``; stages ``"global"``, ``"orient"``, ``"legalize"``,
        ``"cells"``, ``"rows"`` and ``"detail"``.
    **options
        See :class:`~floorwidget.placer.options.PlacerOptions`.

    Returns
    -------
    Floorplan
        New floorplan; ``info`` holds ``iterations`` (total), ``stage_iterations``,
        ``overflow`` (final), ``seconds`` (total), ``stage_seconds``, ``bins``, ``legalized``
        (whether macros were legalised), ``target_density`` (the value used), ``channel``,
        ``macro_layout`` (the layout used), ``hpwl_global`` (before the cells went onto rows)
        and, with legal cells, ``cell_displacement``, ``dp_gain``.  ``overflow`` is measured
        on the placer's own bins (``bins``; a side of about two objects) with placed macros
        counted as obstacles, so it reads lower than
        :func:`floorwidget.metrics.density_overflow` on its default grid of a few row heights.

    Raises
    ------
    PlacementError
        When the movable area does not fit the free core area even at density 1, or the
        macros or cells cannot be legalised; the input is untouched.
    ValueError
        For an unknown or out-of-range option.

    Examples
    --------
    >>> import floorwidget as fw                                  # doctest: +SKIP
    >>> design = fw.load("demo_data/heron_dsp.json")              # doctest: +SKIP
    >>> fp = place(design, target_density=0.8, seed=0)            # doctest: +SKIP
    >>> fp.info["overflow"] <= 0.10                               # doctest: +SKIP
    True
    """
    t_all = time.perf_counter()
    src, target, opts, mult = _start(design, floorplan, target_density, seed, options)
    info: dict[str, Any] = {"stage_seconds": {}, "stage_iterations": {},
                            "channel": _channel(design, opts)}
    if use_multilevel(design, src, opts.multilevel):
        from .multilevel import place_multilevel

        out, legalized, final_ov = place_multilevel(design, src, target, opts, mult, seed,
                                                    info, progress)
    else:
        out, legalized, final_ov = _place_flat(design, src, target, opts, mult, seed, info,
                                               progress)
    out = _rows_stage(design, out, src, opts, target, info, progress)
    return _finish(design, out, src, info, legalized, final_ov, t_all, target, seed)


MULTILEVEL_MIN = 200_000  # "auto" places designs of at least this many movable cells multilevel


def use_multilevel(design: Design, fp: Floorplan, mode: str) -> bool:
    """Whether :func:`place` runs the multilevel flow: ``mode`` "on"/"off", or "auto" from
    :data:`MULTILEVEL_MIN` movable standard cells on (DEVELOPERS.md has the measurements)."""
    if mode != "auto":
        return mode == "on"
    return int(np.count_nonzero((fp.status == MOVABLE) & (design.kind == CELL))) \
        >= MULTILEVEL_MIN


def _place_flat(design: Design, src: Floorplan, target: float, opts: PlacerOptions, mult,
                seed: int, info: dict, progress: Progress) -> tuple[Floorplan, bool, float]:
    """Global placement of every movable block, then the macros arranged and legalised and
    the cells and clusters re-spread around them; returns ``(floorplan, legalized,
    overflow)``."""
    out = src.copy()
    movable = (src.status == MOVABLE) & (design.kind != TERMINAL)
    mov_idx = np.flatnonzero(movable)

    # --- global: every movable block, macros included --------------------------------------
    t0 = time.perf_counter()
    st = _Stage(design, out, movable, target, opts, mult)
    st.check_capacity(target)
    cx, cy = out.centres()
    _initial_positions(st, cx, cy, mov_idx, seed)
    st.wirelength(cx, cy, out.orient, opts, opts.initial_iterations, progress, "global")
    _gather_unconnected(st, cx, cy)
    res = st.spread(cx, cy, out.orient, opts, k0=0, max_it=opts.max_iterations, min_it=0,
                    target_overflow=opts.overflow_target, progress=progress, stage="global")
    _write_back(out, cx, cy, mov_idx)
    info["stage_iterations"]["global"] = res["iterations"]
    info["global_overflow"] = res["overflow"]
    info["bins"] = res["bins"]
    info["stage_seconds"]["global"] = time.perf_counter() - t0
    _report(progress, "global", 1.0, {"overflow": res["overflow"]})

    macros = _movable_macros(design, src)
    legalized = False
    final_ov = res["overflow"]
    if len(macros) and opts.legalize_macros:
        out = _arrange_macros(design, out, macros, opts, info, progress)
        legalized = True
        # --- cells and clusters around the placed macros --------------------------------------
        t0 = time.perf_counter()
        soft = _soft_mask(design, src)
        if soft.any():
            st2 = _Stage(design, out, soft, target, opts, mult)
            st2.check_capacity(target)
            cx, cy = out.centres()
            k0 = 0.0  # weak anchors first: strong ones drag cells to the rough look-ahead spots
            res2 = st2.spread(cx, cy, out.orient, opts, k0=k0, max_it=opts.max_iterations,
                              min_it=2, target_overflow=opts.overflow_target,
                              progress=progress, stage="cells")
            _write_back(out, cx, cy, st2.vars)
            info["stage_iterations"]["cells"] = res2["iterations"]
            final_ov = res2["overflow"]
            info["bins"] = res2["bins"]
        info["stage_seconds"]["cells"] = time.perf_counter() - t0
        _report(progress, "cells", 1.0, {"overflow": final_ov})
    return out, legalized, final_ov


AUTO_MAX_MACROS = 128     # "auto" arranges at most this many movable macros on the periphery
AUTO_MIN_SHARE = 0.002    # ... each at least this share of the core area on average


def choose_layout(design: Design, fp: Floorplan, macros: np.ndarray, layout: str) -> str:
    """The macro arrangement ``"auto"`` stands for.

    ``"periphery"`` for designs whose movable macros are hard blocks in the floorplanning
    sense — at most :data:`AUTO_MAX_MACROS` of them, with a mean area of at least
    :data:`AUTO_MIN_SHARE` of the core (memories, PHYs; the common-practice rule then applies)
    — and ``"free"`` for netlists where "macros" are hundreds of small blocks mixed with the
    logic (e.g. the IBM mixed-size suite), where pushing them to the boundary costs
    wirelength for nothing.  DEVELOPERS.md gives the measurements behind the thresholds.
    """
    if layout != "auto":
        return layout
    if not len(macros):
        return "free"
    c = design.core
    share = float(np.mean(design.width[macros] * design.height[macros])) / float(
        (c[2] - c[0]) * (c[3] - c[1]))
    return "periphery" if len(macros) <= AUTO_MAX_MACROS and share >= AUTO_MIN_SHARE \
        else "free"


def _arrange_macros(design: Design, out: Floorplan, macros: np.ndarray, opts: PlacerOptions,
                    info: dict, progress: Progress) -> Floorplan:
    """Orientation (pins toward the logic, then HPWL), the layout (periphery or free) with
    legalisation, and the channel rule, as the timed stages ``"orient"`` and ``"legalize"``."""
    layout = choose_layout(design, out, macros, opts.macro_layout)
    info["macro_layout"] = layout
    t0 = time.perf_counter()
    if opts.orient:
        out = choose_orientations(design, out, macros=macros,
                                  restrict=_inward(design, out, macros))
    info["stage_seconds"]["orient"] = time.perf_counter() - t0
    _report(progress, "orient", 1.0, {})
    t0 = time.perf_counter()
    channel = info["channel"]
    if layout == "periphery":
        out, edge = push_to_edges(design, out, macros)
        out = close_channels(design, out, macros, channel)
        out = compact(design, out, macros, edge)  # what a widened channel let go touches again
        out = fill_pockets(design, out, macros)   # logic walled in by macros
        out = close_channels(design, out, macros, channel)  # and what those moves opened
    else:
        out = legalize_macros(design, out, macros=macros)
        out = close_channels(design, out, macros, channel)
    if opts.orient:  # flips only (footprints stay): pins away from the wall they now face
        out = choose_orientations(design, out, macros=macros, swap=False,
                                  restrict=_inward(design, out, macros))
    info["stage_seconds"]["legalize"] = time.perf_counter() - t0
    _report(progress, "legalize", 1.0, {})
    return out


def _channel(design: Design, opts: PlacerOptions) -> float:
    """The channel rule's width: the option, or the design's default."""
    return default_channel(design) if opts.channel is None else float(opts.channel)


def _inward(design: Design, fp: Floorplan, macros: np.ndarray) -> np.ndarray:
    """Orientation masks (per block) whose pins do not face the macro's nearest core edge."""
    m = np.full(design.num_blocks, 0xFF, np.int64)
    m[macros] = orient_mask_inward(design, fp, np.sort(macros))[np.argsort(np.argsort(macros))]
    return m


def _initial_positions(st: _Stage, cx, cy, mov_idx: np.ndarray, seed: int) -> None:
    """Start of the global placement: every movable block at the core centre with a small
    seeded jitter, where fixed pins will pull them apart; blocks whose connected group reaches
    no fixed pin start from spectral coordinates instead (the eigenvectors of the net
    Laplacian for its second and third smallest eigenvalues, Hall, Management Science 17(3),
    1970), scaled to the core, so a design without fixed I/O does not collapse to one point."""
    c = st.design.core
    rng = np.random.default_rng(seed)
    span = np.array([c[2] - c[0], c[3] - c[1]])
    jit = rng.standard_normal((len(mov_idx), 2)) * 1e-3 * span
    cx[mov_idx] = (c[0] + c[2]) / 2 + jit[:, 0]
    cy[mov_idx] = (c[1] + c[3]) / 2 + jit[:, 1]
    fl = st.sys.floating
    if fl.sum() >= 3:
        u, v = spectral_coordinates(st.sys, fl, seed)
        blk = st.vars[fl]
        cx[blk] = c[0] + span[0] * (0.25 + 0.5 * u)
        cy[blk] = c[1] + span[1] * (0.25 + 0.5 * v)
    st.clamp(cx, cy)


def _gather_unconnected(st: _Stage, cx, cy) -> None:
    """Blocks on no net, and groups that reach no fixed pin, have no place of their own: put
    them at the area-weighted centre of the anchored movable blocks (the spreading then finds
    them room), not wherever they started or at the core centre."""
    lone = st.sys.pins_of_var == 0
    fl = st.sys.floating & ~lone
    k = ~(lone | st.sys.floating)
    if not k.any():
        return
    v = st.vars
    a = st.w * st.h
    centre = (float(np.average(cx[v[k]], weights=a[k])),
              float(np.average(cy[v[k]], weights=a[k])))
    # groups that reach no fixed pin: moved as a whole, and pulled there from now on
    if fl.any():
        cx[v[fl]] += centre[0] - np.average(cx[v[fl]], weights=a[fl])
        cy[v[fl]] += centre[1] - np.average(cy[v[fl]], weights=a[fl])
        st.sys.pull_to = centre
    cx[v[lone]] = centre[0]
    cy[v[lone]] = centre[1]


def _rows_stage(design: Design, out: Floorplan, src: Floorplan, opts: PlacerOptions,
                target: float, info: dict, progress: Progress) -> Floorplan:
    """Standard cells onto rows and sites (Abacus), then swap-based detailed placement, when
    ``cells="legal"``; timed and reported as the stages ``"rows"`` and ``"detail"``."""
    info["hpwl_global"] = hpwl(design, out)
    if opts.cells != "legal":
        return out
    cells = cell_mask(design, src)
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
    info.update(_merge_facts(got, "cells_legalized", "cell_displacement",
                             "cell_max_displacement"))
    info["stage_seconds"]["rows"] = time.perf_counter() - t0
    _report(progress, "rows", 1.0, {})
    passes = opts.detail_passes
    if passes is None:
        passes = MULTILEVEL_DETAIL_PASSES if "levels" in info else DETAIL_PASSES
    if passes:
        t0 = time.perf_counter()
        got = []
        for grp, keep, avoid in groups:
            out, facts = detailed_place(design, out, grp, passes=passes,
                                        target_density=min(1.0, target + DP_SLACK),
                                        keep=keep, avoid=avoid)
            got.append(facts)
        info.update({"dp_gain": float(sum(f["dp_gain"] for f in got)),
                     "dp_swaps": int(sum(f["dp_swaps"] for f in got))})
        info["stage_seconds"]["detail"] = time.perf_counter() - t0
        _report(progress, "detail", 1.0, {})
    return out


def _merge_facts(facts: list[dict], count: str, mean: str, peak: str) -> dict:
    """Facts of row legalisation over several groups: counts summed, the mean weighted by
    count, the maximum of maxima (one group: its facts unchanged)."""
    if len(facts) == 1:
        return facts[0]
    n = sum(f[count] for f in facts)
    return {count: n, mean: sum(f[mean] * f[count] for f in facts) / max(n, 1),
            peak: max(f[peak] for f in facts)}


def refine(design: Design, floorplan: Floorplan, *, target_density: float = 0.8, seed: int = 0,
           progress: Progress = None, **options: Any) -> Floorplan:
    """Warm-started clean-up after a hand edit (meant to run on every drag and drop).

    Movable macros are legalised from their current positions (minimal displacement: only those
    that now overlap something move noticeably); cells and clusters are re-spread for a few
    iterations (``refine_iterations``) from where they are, around the macros; standard cells
    go back onto rows with one detailed-placement pass (``detail_passes`` defaults to
    :data:`REFINE_DETAIL_PASSES` here).  PINNED and FIXED blocks, and terminals, are kept
    bit-exact.

    Parameters
    ----------
    design, floorplan : the design and its current floorplan (not modified).
    target_density, seed, progress, **options : as for :func:`place`.

    Returns
    -------
    Floorplan
        New floorplan with ``info`` (``iterations``, ``overflow``, ``seconds``,
        ``stage_seconds``).

    Raises
    ------
    PlacementError
        When the macros cannot be legalised or the cells do not fit; the input is untouched.
    """
    options = {"detail_passes": REFINE_DETAIL_PASSES, **options}
    t_all = time.perf_counter()
    src, target, opts, mult = _start(design, floorplan, target_density, seed, options)
    out = src.copy()
    info: dict[str, Any] = {"stage_seconds": {}, "stage_iterations": {},
                            "channel": _channel(design, opts)}
    macros = _movable_macros(design, src)
    legalized = False
    if len(macros) and opts.legalize_macros:
        out = _legalize_stage(design, out, macros, info, progress)
        legalized = True
    t0 = time.perf_counter()
    soft = _soft_mask(design, src)
    ov = 0.0
    if soft.any():
        st = _Stage(design, out, soft, target, opts, mult)
        st.check_capacity(target)
        cx, cy = out.centres()
        res = st.spread(cx, cy, out.orient, opts, k0=max(opts.max_iterations // 4, 8),
                        max_it=opts.refine_iterations,
                        min_it=min(1, opts.refine_iterations),
                        target_overflow=opts.overflow_target, progress=progress, stage="cells")
        _write_back(out, cx, cy, st.vars)
        ov = res["overflow"]
        info["stage_iterations"]["cells"] = res["iterations"]
        info["bins"] = res["bins"]
    info["stage_seconds"]["cells"] = time.perf_counter() - t0
    _report(progress, "cells", 1.0, {"overflow": ov})
    out = _rows_stage(design, out, src, opts, target, info, progress)
    return _finish(design, out, src, info, legalized, ov, t_all, target, seed)



def _start(design: Design, floorplan: Floorplan | None, target_density: float, seed: int,
           options: dict) -> tuple[Floorplan, float, Any, Any]:
    """Checked inputs of place and refine: floorplan, target density, options, net factors."""
    src = _check_inputs(design, floorplan)
    target = check_range("target_density", target_density, 0.0, 1.0, lo_open=True)
    check_int("seed", seed, 0, 2**32 - 1)
    opts = make_options(options)
    target = fitting_target(design, src, target)
    return src, target, opts, net_multipliers(design, opts.net_weight_scale)


TARGET_MARGIN = 0.05  # added to the utilisation when the asked target density is too low


def utilisation(design: Design, fp: Floorplan) -> float:
    """Movable area (macros, clusters, cells; not terminals) ÷ the core area left free by
    fixed and pinned blocks (with their halos) and placement blockages."""
    movable = (fp.status == MOVABLE) & (design.kind != TERMINAL)
    area = float(np.sum(design.width[movable] * design.height[movable]))
    c = design.core
    grid = make_grid(c, np.ones(1), np.ones(1), bin_size=max(c[2] - c[0], c[3] - c[1]) / 256)
    free = float(np.maximum(capacity_map(grid, 1.0, _obstacles(design, fp, ~movable))
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
        raise PlacementError(f"design {design.name!r}: movable area is {u:.1%} of the free core "
                             "area; it cannot fit even at target density 1.0")
    used = min(1.0, u + TARGET_MARGIN)
    warnings.warn(f"design {design.name!r}: utilisation {u:.3f} exceeds target_density "
                  f"{target:g}; placing at {used:.3f}", PlacementWarning, stacklevel=4)
    return used


def _legalize_stage(design: Design, fp: Floorplan, macros, info: dict,
                    progress: Progress) -> Floorplan:
    """Macro legalisation as a timed, reported stage of place and refine."""
    t0 = time.perf_counter()
    out = legalize_macros(design, fp, macros=macros)
    info["stage_seconds"]["legalize"] = time.perf_counter() - t0
    _report(progress, "legalize", 1.0, {})
    return out


def _finish(design: Design, out: Floorplan, src: Floorplan, info: dict, legalized: bool,
            overflow: float, t_all: float, target: float, seed: int) -> Floorplan:
    """The result: input statuses, non-movable blocks copied back bit-exact, facts in info."""
    out = Floorplan(design, out.x, out.y, out.orient, src.status)
    _restore_fixed(out, src)
    info["legalized"] = legalized
    info["overflow"] = overflow
    info["iterations"] = int(sum(info["stage_iterations"].values()))
    info["seconds"] = time.perf_counter() - t_all
    info["target_density"] = target
    info["seed"] = int(seed)
    out.info = info
    _warn_pinned(design, out)
    return out


def _warn_pinned(design: Design, fp: Floorplan) -> None:
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

def legalize(design: Design, floorplan: Floorplan, **options: Any) -> Floorplan:
    """Legalise the movable macros only (no orientation change, cells untouched).

    Parameters
    ----------
    design, floorplan : the design and its current floorplan (not modified).
    **options : placer options (validated; only ``legalize_macros`` matters here).

    Returns
    -------
    Floorplan
        New floorplan with the movable macros at legal spots near where they were.

    Raises
    ------
    PlacementError
        When the macros cannot be legalised; the input is untouched.
    """
    t0 = time.perf_counter()
    src = _check_inputs(design, floorplan)
    make_options(options)
    macros = _movable_macros(design, src)
    out = legalize_macros(design, src.copy(), macros=macros) if len(macros) else src.copy()
    out = Floorplan(design, out.x, out.y, out.orient, src.status)
    _restore_fixed(out, src)
    out.info = {"legalized": True, "seconds": time.perf_counter() - t0, "iterations": 0}
    _warn_pinned(design, out)
    return out
