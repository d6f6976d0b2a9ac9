"""Multilevel placement for large designs: place a clustered netlist, then uncoarsen.

The design is coarsened (:func:`~floorwidget.placer.coarsen.coarsen`) to about
:data:`TOP_BLOCKS` blocks (a quarter of the design at most). The coarsest level goes through the
whole flat flow — global placement, macro orientation, arrangement and legalisation, the
re-spread of the clusters around the macros — so every floorplanning decision is taken on a
netlist small enough to place in seconds. Then, level by level, the members of each cluster
start at its place and a short warm-started spreading run (anchored to the look-ahead positions
from the start, so the arrangement found above is kept) refines them; the macros stay where the
coarsest level put them. The last level is the input design;
:func:`~floorwidget.placer.flow.place` then puts the cells on rows as in the flat flow.

References
----------
T. F. Chan, J. Cong, K. Sze, Proc. ISPD 2005 (multilevel analytic placement: a placement of
the clustered netlist is the start of the next finer level).
G. Karypis, V. Kumar, SIAM J. Scientific Computing 20(1), 1998 (the multilevel scheme).
"""

from __future__ import annotations

import time

import numpy as np

from ..design import Design, Floorplan
from .coarsen import Clustering, coarsen

__all__ = ["place_multilevel", "TOP_BLOCKS"]

TOP_BLOCKS = 20_000   # the coarsest level has about this many blocks
LEVEL_STEP = 4.0      # a finer level is refined when it has this many times the blocks of the
                      # last refined one (and the input level always is)
LEVEL_ITERATIONS = 12  # most spreading iterations per refined level
LEVEL_K0 = 20.0        # the anchor schedule of a refined level starts this far in


def level_multipliers(clus: Clustering, mult) -> list:
    """Net-weight multipliers of every level from those of the input design."""
    if np.ndim(mult) == 0:
        return [mult] * clus.num_levels
    return [np.asarray(mult)[clus.net_origin(k)] for k in range(clus.num_levels)]


def place_multilevel(design: Design, src: Floorplan, target: float, opts, mult, seed: int,
                     info: dict, progress) -> tuple[Floorplan, bool, float]:
    """The multilevel counterpart of the flat global stage of
    :func:`~floorwidget.placer.flow.place`; returns ``(floorplan, legalized, overflow)`` with
    the cells at their global positions (not yet on rows).  Adds the stages ``"coarsen"`` and
    ``"uncoarsen"`` and ``info["levels"]`` (blocks per level, finest first)."""
    from .flow import _place_flat, _report, _soft_mask, _Stage, _write_back

    t0 = time.perf_counter()
    # (a design smaller than that, asked for "on", is still clustered to a quarter)
    clus = coarsen(design, src, target_blocks=min(TOP_BLOCKS, design.num_blocks // 4),
                   seed=seed)
    mults = level_multipliers(clus, mult)
    info["levels"] = [d.num_blocks for d in clus.designs]
    info["stage_seconds"]["coarsen"] = time.perf_counter() - t0
    _report(progress, "coarsen", 1.0, {"levels": info["levels"]})

    top = clus.num_levels - 1
    coarse = clus.designs[top]
    base = src if top == 0 else coarse.initial
    out, legalized, ov = _place_flat(coarse, base, target, opts, mults[top], seed, info,
                                     progress)
    if top == 0:
        return out, legalized, ov

    t0 = time.perf_counter()
    its = 0
    last = coarse.num_blocks
    for k in range(top - 1, -1, -1):
        d = clus.designs[k]
        out = clus.project(k + 1, out, base=src if k == 0 else None, seed=seed)
        if k and d.num_blocks < LEVEL_STEP * last:
            continue
        last = d.num_blocks
        soft = _soft_mask(d, out)
        if not soft.any():
            continue
        st = _Stage(d, out, soft, target, opts, mults[k])
        cx, cy = out.centres()
        res = st.spread(cx, cy, out.orient, opts, k0=LEVEL_K0, max_it=LEVEL_ITERATIONS,
                        min_it=2, target_overflow=opts.overflow_target, progress=progress,
                        stage="uncoarsen")
        _write_back(out, cx, cy, st.vars)
        its += res["iterations"]
        ov = res["overflow"]
        info["bins"] = res["bins"]
    info["stage_iterations"]["uncoarsen"] = its
    info["stage_seconds"]["uncoarsen"] = time.perf_counter() - t0
    _report(progress, "uncoarsen", 1.0, {"overflow": ov})
    return out, legalized, ov
