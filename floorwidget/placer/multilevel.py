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

from ..design import CELL, Design, Floorplan
from .coarsen import Clustering, coarsen
from .errors import PlacementError
from .flat import place_flat
from .stages import SpreadStage, finish, report, rows_stage, soft_mask, start, write_back

__all__ = ["TOP_BLOCKS", "check_memory", "expand", "place_multilevel", "top_blocks",
           "uncoarsen"]

TOP_BLOCKS = 20_000   # the coarsest level has about this many movable cells and clusters
LEVEL_STEP = 4.0      # a finer level is refined when it has this many times the blocks of the
                      # last refined one (and the input level always is)
LEVEL_ITERATIONS = 12  # most spreading iterations per refined level
LEVEL_K0 = 20.0        # the anchor schedule of a refined level starts this far in
EPS_SHARE = 0.5        # ... and its anchors give way over this share of the cluster side


#: Working memory of the placement of the input level, per pin (measured at 10^6 cells: 3.3 GB
#: peak for 4.1e6 pins, the design included; DEVELOPERS.md); a run that cannot fit is refused.
BYTES_PER_PIN = 800


def available_memory() -> float | None:
    """Bytes of memory the system can still give (``MemAvailable``; ``None`` where unknown)."""
    try:
        with open("/proc/meminfo", encoding="ascii") as f:
            for line in f:
                if line.startswith("MemAvailable:"):
                    return float(line.split()[1]) * 1024
    except OSError:
        return None
    return None


def check_memory(design: Design, what: str) -> None:
    """Refuse, with the figures, a placement of every cell of ``design`` that would not fit in
    the memory left (rather than be killed halfway by the operating system).

    Raises
    ------
    PlacementError
    """
    need = BYTES_PER_PIN * design.num_pins
    have = available_memory()
    if have is not None and need > have:
        raise PlacementError(
            f"design {design.name!r}: {what} of all {design.num_blocks:,} blocks needs about "
            f"{need / 2**30:.1f} GB of memory ({design.num_pins:,} pins), {have / 2**30:.1f} GB "
            "are available; work on the clustered design (Session clustered=True) or use a "
            "machine with more memory")


def _ancestor_side(clus: Clustering, k: int, up: int) -> np.ndarray:
    """Side of the level-``up`` cluster that every block of level ``k`` lies in."""
    m = np.arange(clus.designs[k].num_blocks)
    for j in range(k, up):
        m = clus.parent[j][m]
    d = clus.designs[up]
    return np.sqrt(d.width * d.height)[m]


def top_blocks(design: Design) -> int:
    """Movable cells and clusters of the coarsest level: :data:`TOP_BLOCKS`, or a quarter of
    the cells of a smaller design."""
    return min(TOP_BLOCKS, int(np.count_nonzero(design.kind == CELL)) // 4)


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
    check_memory(design, "placing")
    t0 = time.perf_counter()
    clus = coarsen(design, src, target_blocks=top_blocks(design), seed=seed)
    mults = level_multipliers(clus, mult)
    info["levels"] = [d.num_blocks for d in clus.designs]
    info["stage_seconds"]["coarsen"] = time.perf_counter() - t0
    report(progress, "coarsen", 1.0, {"levels": info["levels"]})

    top = clus.num_levels - 1
    coarse = clus.designs[top]
    base = src if top == 0 else coarse.initial
    out, legalized, ov = place_flat(coarse, base, target, opts, mults[top], seed, info,
                                     progress)
    if top == 0:
        return out, legalized, ov

    out, ov = uncoarsen(clus, out, src, target, opts, mults, seed, info, progress, ov)
    return out, legalized, ov


def uncoarsen(clus: Clustering, out: Floorplan, src: Floorplan, target: float, opts, mults,
              seed: int, info: dict, progress, ov: float = 0.0) -> tuple[Floorplan, float]:
    """From a floorplan ``out`` of the coarsest level down to the input design: members start
    at their cluster, refined levels get a short spreading run (macros and other singletons
    stay put).  Returns the input design's floorplan (statuses of ``src``) and the overflow;
    adds the stage ``"uncoarsen"`` to ``info``."""
    t0 = time.perf_counter()
    its = 0
    top = clus.num_levels - 1
    last = top
    for k in range(top - 1, -1, -1):
        d = clus.designs[k]
        out = clus.project(k + 1, out, base=src if k == 0 else None, seed=seed)
        if k and d.num_blocks < LEVEL_STEP * clus.designs[last].num_blocks:
            continue
        soft = soft_mask(d, out)
        if not soft.any():
            last = k
            continue
        st = SpreadStage(d, out, soft, target, opts, mults[k])
        # the anchors of a block that sits where the look-ahead wants it would be near-rigid
        # (weight / distance): let blocks move about the extent of the cluster they came from
        anc = _ancestor_side(clus, k, last)
        st.eps_a = max(st.eps_a, EPS_SHARE * float(np.median(anc[st.vars])))
        last = k
        cx, cy = out.centres()
        res = st.spread(cx, cy, out.orient, opts, k0=LEVEL_K0, max_it=LEVEL_ITERATIONS,
                        min_it=2, target_overflow=opts.overflow_target, progress=progress,
                        stage="uncoarsen")
        write_back(out, cx, cy, st.vars)
        its += res["iterations"]
        ov = res["overflow"]
        info["bins"] = res["bins"]
    info["stage_iterations"]["uncoarsen"] = its
    info["stage_seconds"]["uncoarsen"] = time.perf_counter() - t0
    report(progress, "uncoarsen", 1.0, {"overflow": ov})
    return out, ov


def expand(clustering: Clustering, coarse: Floorplan, floorplan: Floorplan | None = None, *,
           target_density: float = 0.8, seed: int = 0, progress=None, **options) -> Floorplan:
    """Every block of the input design placed from a floorplan of the coarsest level.

    Macros and the other singletons (pinned and fixed blocks, cells that never merged) take
    their position, orientation, status and halo from ``coarse``, every level the blockages of
    its design — where the engineer put them on
    the clustered design — and the members of each cluster are uncoarsened level by level
    around them (:func:`uncoarsen`), then put on rows as by :func:`~floorwidget.placer.place`
    (option ``cells``).  Macros are not moved.

    Parameters
    ----------
    clustering : Clustering
    coarse : Floorplan
        Of ``clustering.coarsest``.
    floorplan : Floorplan, optional
        Of the input design: the statuses of the blocks inside clusters (default its initial
        floorplan).
    target_density, seed, progress, **options : as for :func:`~floorwidget.placer.place`.

    Returns
    -------
    Floorplan
        Of the input design, with ``info`` as from :func:`~floorwidget.placer.place`.

    Raises
    ------
    PlacementError
        When the placement would need more memory than the machine has left
        (:func:`check_memory`), before anything is done.
    """
    t_all = time.perf_counter()
    if not isinstance(coarse, Floorplan):
        raise ValueError("expand needs a floorplan of the clustering's coarsest design")
    clustering = clustering.with_constraints(coarse.design)  # hand-drawn blockages, halos
    top = clustering.num_levels - 1
    design = clustering.designs[0]
    given = design.initial if floorplan is None else floorplan
    base = Floorplan(design, given.x, given.y, given.orient, given.status)  # (copies)
    c = clustering.cluster_of(top)
    single = np.bincount(c, minlength=clustering.coarsest.num_blocks)[c] == 1
    for f in ("x", "y", "orient", "status"):
        getattr(base, f)[single] = getattr(coarse, f)[c[single]]
    src, target, opts, mult = start(design, base, target_density, seed, options)
    check_memory(design, "placing")
    info: dict = {"stage_seconds": {}, "stage_iterations": {}, "levels":
                  [d.num_blocks for d in clustering.designs]}
    out, ov = uncoarsen(clustering, coarse.copy(), src, target, opts,
                        level_multipliers(clustering, mult), seed, info, progress)
    out = rows_stage(design, out, src, opts, target, info, progress)
    return finish(design, out, src, info, False, ov, t_all, target, seed)
