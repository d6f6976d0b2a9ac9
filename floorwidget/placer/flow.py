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
from typing import Any

import numpy as np

from ..design import CELL, MOVABLE, Design, Floorplan
from .errors import PlacementError
from .flat import place_flat
from .legalize import legalize_macros
from .macro_layout import channel_width, choose_layout  # noqa: F401  (choose_layout: public here)
from .stages import (  # noqa: F401  (TARGET_MARGIN, utilisation, fitting_target: public here)
    TARGET_MARGIN,
    Progress,
    SpreadStage,
    check_inputs,
    finish,
    fitting_target,
    legalize_stage,
    make_options,
    movable_macro_indices,
    report,
    restore_fixed,
    rows_stage,
    soft_mask,
    start,
    utilisation,
    warn_pinned,
    write_back,
)

__all__ = ["place", "refine", "legalize"]

REFINE_DETAIL_PASSES = 1  # refine is the quick clean-up after a hand edit (aes: 0.63 -> 0.24 s)


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
        :func:`floorwidget.metrics.density_overflow` on its default grid of a few row heights;
        when the field spread the cells (``spreading="field"``) it is the field's own, over
        ``field_density`` (also in ``info``, with ``field_overflow``).

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
    src, target, opts, mult = start(design, floorplan, target_density, seed, options)
    info: dict[str, Any] = {"stage_seconds": {}, "stage_iterations": {},
                            "channel": channel_width(design, opts)}
    if use_multilevel(design, src, opts.multilevel):
        from .multilevel import place_multilevel

        out, legalized, final_ov = place_multilevel(design, src, target, opts, mult, seed,
                                                    info, progress)
    else:
        out, legalized, final_ov = place_flat(design, src, target, opts, mult, seed, info,
                                               progress)
    out = rows_stage(design, out, src, opts, target, info, progress)
    return finish(design, out, src, info, legalized, final_ov, t_all, target, seed)


MULTILEVEL_MIN = 200_000  # "auto" places designs of at least this many movable cells multilevel


def use_multilevel(design: Design, fp: Floorplan, mode: str) -> bool:
    """Whether :func:`place` runs the multilevel flow: ``mode`` "on"/"off", or "auto" from
    :data:`MULTILEVEL_MIN` movable standard cells on (DEVELOPERS.md has the measurements)."""
    if mode != "auto":
        return mode == "on"
    return int(np.count_nonzero((fp.status == MOVABLE) & (design.kind == CELL))) \
        >= MULTILEVEL_MIN


def refine(design: Design, floorplan: Floorplan, *, target_density: float = 0.8, seed: int = 0,
           progress: Progress = None, around=None, **options: Any) -> Floorplan:
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
    around : names or indices, optional
        The blocks just moved by hand.  Only the cells and clusters near where they were and
        are (:func:`refine_window`; macros the legaliser moved count too) are re-spread and put
        back on rows; everything else stays bit for bit, so the cost follows the change, not
        the design.  Default: every cell and cluster.

    Returns
    -------
    Floorplan
        New floorplan with ``info`` (``iterations``, ``overflow``, ``seconds``,
        ``stage_seconds``; ``window_blocks`` with ``around``).

    Raises
    ------
    PlacementError
        When the macros cannot be legalised or the cells do not fit; the input is untouched.
    """
    options = {"detail_passes": REFINE_DETAIL_PASSES, **options}
    t_all = time.perf_counter()
    src, target, opts, mult = start(design, floorplan, target_density, seed, options)
    out = src.copy()
    info: dict[str, Any] = {"stage_seconds": {}, "stage_iterations": {},
                            "channel": channel_width(design, opts)}
    macros = movable_macro_indices(design, src)
    legalized = False
    if len(macros) and opts.legalize_macros:
        out = legalize_stage(design, out, macros, info, progress)
        legalized = True
    t0 = time.perf_counter()
    soft = soft_mask(design, src)
    window = None
    if around is not None:
        moved = np.flatnonzero((out.x != src.x) | (out.y != src.y) | (out.orient != src.orient))
        window = refine_window(design, src, out, _indices(design, around), nudged=moved)
        soft &= window
        info["window_blocks"] = int(soft.sum())
    ov = 0.0
    if soft.any():
        st = _window_stage(design, out, soft, target, opts, mult, window is not None)
        cx, cy = out.centres()
        res = st.spread(cx, cy, out.orient, opts, k0=max(opts.max_iterations // 4, 8),
                        max_it=opts.refine_iterations,
                        min_it=min(1, opts.refine_iterations),
                        target_overflow=opts.overflow_target, progress=progress, stage="cells")
        write_back(out, cx, cy, st.vars)
        ov = res["overflow"]
        info["stage_iterations"]["cells"] = res["iterations"]
        info["bins"] = res["bins"]
    info["stage_seconds"]["cells"] = time.perf_counter() - t0
    report(progress, "cells", 1.0, {"overflow": ov})
    out = rows_stage(design, out, src, opts, target, info, progress, only=window)
    return finish(design, out, src, info, legalized, ov, t_all, target, seed)


WINDOW_MARGIN = 1.0  # a refine window reaches this many times the moved block's side around it


def _window_stage(design: Design, fp: Floorplan, soft: np.ndarray, target: float, opts, mult,
                  local: bool) -> SpreadStage:
    """The refine's spreading problem: with ``local``, over the box of the window's objects
    grown by a quarter of its size (the core when they do not fit in it at the target);
    else over the core."""
    if local:
        r = fp.rects()[soft]
        c = design.core
        lo, hi = r[:, :2].min(axis=0), r[:, 2:].max(axis=0)
        pad = 0.25 * (hi - lo) + (4.0 * float(np.median(design.row_height))
                                  if len(design.row_height) else 0.0)
        box = np.array([max(lo[0] - pad[0], c[0]), max(lo[1] - pad[1], c[1]),
                        min(hi[0] + pad[0], c[2]), min(hi[1] + pad[1], c[3])])
        if box[2] > box[0] and box[3] > box[1]:
            st = SpreadStage(design, fp, soft, target, opts, mult, box=box)
            try:
                st.check_capacity(target)
                return st
            except PlacementError:
                pass  # too full there: the whole core, as a full refine
    st = SpreadStage(design, fp, soft, target, opts, mult)
    st.check_capacity(target)
    return st


def _indices(design: Design, blocks) -> np.ndarray:
    """Block indices from names or indices."""
    out = [design.block(b) if isinstance(b, str) else int(b) for b in blocks]
    return np.asarray(out, dtype=np.intp)


def refine_window(design: Design, before: Floorplan, after: Floorplan,
                  blocks: np.ndarray, nudged: np.ndarray | None = None) -> np.ndarray:
    """Blocks (a mask) near where ``blocks`` were in ``before`` and are in ``after``: centres
    inside a footprint (with halo) grown by :data:`WINDOW_MARGIN` times its longer side plus
    four row heights (or 1 % of the core without rows) — the logic a hand move disturbs.

    ``nudged`` are blocks the macro legaliser moved (not the hand): their footprints grow only
    by the distance they moved plus the same pad, since the logic they disturb is what they
    passed over (an off-grid macro snapped to the grid disturbs a sliver, not its whole
    neighbourhood)."""
    mask = np.zeros(design.num_blocks, bool)
    nudged = np.setdiff1d(np.asarray([] if nudged is None else nudged, dtype=np.intp), blocks)
    if not len(blocks) and not len(nudged):
        return mask
    pad = 4.0 * float(np.median(design.row_height)) if len(design.row_height) else \
        0.01 * float(min(design.core[2] - design.core[0], design.core[3] - design.core[1]))
    cx, cy = after.centres()
    blocks = np.asarray(blocks, dtype=np.intp)
    shift = np.maximum(np.abs(after.x[nudged] - before.x[nudged]),
                       np.abs(after.y[nudged] - before.y[nudged]))
    boxes = []
    for fp in (before, after):
        r = fp.rects(halo=True)[blocks]
        side = np.maximum(r[:, 2] - r[:, 0], r[:, 3] - r[:, 1]) * WINDOW_MARGIN + pad
        r = np.concatenate([r, fp.rects(halo=True)[nudged]])
        side = np.concatenate([side, shift + pad])
        boxes.append(np.stack([r[:, 0] - side, r[:, 1] - side, r[:, 2] + side,
                               r[:, 3] + side], axis=1))
    for b in np.concatenate(boxes):
        mask |= (cx >= b[0]) & (cx <= b[2]) & (cy >= b[1]) & (cy <= b[3])
    return mask


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
    src = check_inputs(design, floorplan)
    make_options(options)
    macros = movable_macro_indices(design, src)
    out = legalize_macros(design, src.copy(), macros=macros) if len(macros) else src.copy()
    out = Floorplan(design, out.x, out.y, out.orient, src.status)
    restore_fixed(out, src)
    out.info = {"legalized": True, "seconds": time.perf_counter() - t0, "iterations": 0}
    warn_pinned(design, out)
    return out
