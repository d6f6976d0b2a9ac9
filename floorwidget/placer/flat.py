"""The flat global stage of :func:`~floorwidget.placer.flow.place`: every movable block
(macros included) placed by Bound2Bound quadratic placement with look-ahead spreading, the
movable macros arranged and legalised (:mod:`~floorwidget.placer.macro_layout`), and the cells
and clusters spread again around them.  The multilevel flow runs it on its coarsest level.

References
----------
P. Spindler, U. Schlichtmann, F. M. Johannes, IEEE Trans. Computer-Aided Design of Integrated
Circuits and Systems 27(8), 2008 (Bound2Bound net model).
M.-C. Kim, D.-J. Lee, I. L. Markov, Proc. IEEE/ACM ICCAD 2010 (look-ahead legalisation with
anchor pseudo-nets).
K. M. Hall, Management Science 17(3), 1970 (spectral placement).
"""

from __future__ import annotations

import time

import numpy as np

from ..design import MACRO, MOVABLE, TERMINAL, Design, Floorplan
from .field import field_spread, usable
from .macro_layout import ARRAY_ROUNDS, arrange_macros, choose_layout, place_arrays
from .options import PlacerOptions
from .solve import spectral_coordinates
from .stages import (
    Progress,
    SpreadStage,
    movable_macro_indices,
    report,
    soft_mask,
    write_back,
)

__all__ = ["cells_stage", "global_stage", "place_flat", "spread_by_field"]

# Look-ahead spreading hands over to the field at this overflow.  Early is better for blocks
# where look-ahead spreading tears clusters apart (the dense pin-less aes: 1.21x its squeezed
# own placement from 0.4, 1.13x from 0.85; from 1.0, the field alone from the collapsed
# quadratic placement, 1.80x); aes_cipher_top and ariane136 stay within 1 %.
FIELD_FROM = 0.85
# The "arrays" layout places the logic first at this density, as if the macros took no room,
# so that the arrays go around the room the logic will take once the field has spread it.
# ariane136, SRAMs movable (HPWL / congestion p99, ÷ own): at 0.8 1.058 / 1.16, 0.6 1.005 /
# 1.21, 0.5 1.020 / 1.13, 0.4 1.033 / 1.13 (one run each).
ARRAYS_LOGIC_DENSITY = 0.5


def place_flat(design: Design, src: Floorplan, target: float, opts: PlacerOptions, mult,
               seed: int, info: dict, progress: Progress) -> tuple[Floorplan, bool, float]:
    """Global placement of every movable block, then the macros arranged and legalised and
    the cells and clusters re-spread around them; returns ``(floorplan, legalized,
    overflow)``."""
    macros = movable_macro_indices(design, src)
    if len(macros) and opts.legalize_macros and \
            choose_layout(design, src, macros, opts.macro_layout) == "arrays":
        # the logic placed as if the macros took no room, then the arrays around it, and the
        # logic spread again: ARRAY_ROUNDS times, each from the last
        out, ov = global_stage(design, src, min(target, ARRAYS_LOGIC_DENSITY), opts, mult,
                               seed, info, progress, macro_area=0.0)
        info["macro_layout"] = "arrays"
        for _ in range(ARRAY_ROUNDS):
            out = place_arrays(design, out, macros, opts, info, progress)
            out, ov = cells_stage(design, out, src, target, opts, mult, info, progress)
        return out, True, ov
    out, final_ov = global_stage(design, src, target, opts, mult, seed, info, progress)
    legalized = False
    if len(macros) and opts.legalize_macros:
        out = arrange_macros(design, out, macros, opts, info, progress)
        legalized = True
        out, final_ov = cells_stage(design, out, src, target, opts, mult, info, progress)
    return out, legalized, final_ov


def global_stage(design: Design, src: Floorplan, target: float, opts: PlacerOptions, mult,
                 seed: int, info: dict, progress: Progress, macro_area: float = 1.0
                 ) -> tuple[Floorplan, float]:
    """Every movable block, macros included, by quadratic placement with look-ahead spreading
    from :func:`initial_positions`; returns the floorplan and its overflow (stage
    ``"global"``)."""
    out = src.copy()
    movable = (src.status == MOVABLE) & (design.kind != TERMINAL)
    mov_idx = np.flatnonzero(movable)
    t0 = time.perf_counter()
    st = SpreadStage(design, out, movable, target, opts, mult)
    if macro_area != 1.0:
        st.scale_area(design.kind[st.vars] == MACRO, macro_area)
    st.check_capacity(target)
    cx, cy = out.centres()
    initial_positions(st, cx, cy, mov_idx, seed)
    st.wirelength(cx, cy, out.orient, opts, opts.initial_iterations, progress, "global")
    gather_unconnected(st, cx, cy)
    field = macro_area == 1.0 and by_field(design, out, movable, opts)
    res = st.spread(cx, cy, out.orient, opts, k0=0, max_it=opts.max_iterations, min_it=0,
                    target_overflow=handover(opts, field), progress=progress, stage="global")
    write_back(out, cx, cy, mov_idx)
    info["stage_iterations"]["global"] = res["iterations"]
    info["global_overflow"] = res["overflow"]
    info["bins"] = res["bins"]
    info["stage_seconds"]["global"] = time.perf_counter() - t0
    report(progress, "global", 1.0, {"overflow": res["overflow"]})
    if field:  # the stage's overflow is then the field's (over spread_density <= target)
        return out, spread_by_field(design, out, movable, target, opts, mult, seed, info,
                                    progress)
    return out, res["overflow"]


def by_field(design: Design, fp: Floorplan, var_mask: np.ndarray, opts: PlacerOptions) -> bool:
    """Whether the objects ``var_mask`` end spread by the field: ``spreading="field"`` and
    :func:`~floorwidget.placer.field.usable`."""
    return opts.spreading == "field" and usable(design, fp, var_mask)


def handover(opts: PlacerOptions, field: bool) -> float:
    """The overflow at which look-ahead spreading stops: the option's, or
    :data:`FIELD_FROM` when the field takes over (rougher is better for it: aes_cipher_top
    HPWL 1.033× its own from 0.10 and 0.25, 1.024× from 0.40, 0.999× from 0.85)."""
    return max(opts.overflow_target, FIELD_FROM) if field else opts.overflow_target


def spread_by_field(design: Design, out: Floorplan, var_mask: np.ndarray, target: float,
                    opts: PlacerOptions, mult, seed: int, info: dict, progress: Progress
                    ) -> float:
    """The cells spread by the field (stage ``"field"``, :mod:`~floorwidget.placer.field`);
    ``out`` changes in place; returns the field's overflow."""
    t0 = time.perf_counter()
    res = field_spread(design, out, var_mask, min(opts.spread_density, target), mult,
                       progress, seed=seed,
                       inflate=(opts.congestion_target, opts.max_inflation))
    info["stage_iterations"]["field"] = res["iterations"]
    info["field_overflow"] = res["overflow"]
    info["field_density"] = res["density"]
    info["field_inflated"] = res["inflated"]
    info["stage_seconds"]["field"] = time.perf_counter() - t0
    report(progress, "field", 1.0, {"overflow": res["overflow"]})
    return float(res["overflow"])


def cells_stage(design: Design, out: Floorplan, src: Floorplan, target: float,
                opts: PlacerOptions, mult, info: dict, progress: Progress
                ) -> tuple[Floorplan, float]:
    """Cells and clusters spread again around the placed macros (stage ``"cells"``); returns
    the floorplan and the overflow."""
    t0 = time.perf_counter()
    soft = soft_mask(design, src)
    ov = float(info.get("global_overflow", 0.0))
    field = by_field(design, out, soft, opts)
    if soft.any():
        st = SpreadStage(design, out, soft, target, opts, mult)
        st.check_capacity(target)
        cx, cy = out.centres()
        # weak anchors first (k0 = 0): strong ones drag cells to the rough look-ahead spots
        res = st.spread(cx, cy, out.orient, opts, k0=0.0, max_it=opts.max_iterations,
                        min_it=2, target_overflow=handover(opts, field), progress=progress,
                        stage="cells")
        write_back(out, cx, cy, st.vars)
        info["stage_iterations"]["cells"] = res["iterations"]
        ov = res["overflow"]
        info["bins"] = res["bins"]
    info["stage_seconds"]["cells"] = time.perf_counter() - t0
    report(progress, "cells", 1.0, {"overflow": ov})
    if field:
        ov = spread_by_field(design, out, soft, target, opts, mult, 0, info, progress)
    return out, ov


def initial_positions(st: SpreadStage, cx, cy, mov_idx: np.ndarray, seed: int) -> None:
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


def gather_unconnected(st: SpreadStage, cx, cy) -> None:
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
