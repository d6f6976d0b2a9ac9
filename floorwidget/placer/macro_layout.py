"""The macro stage of the flat flow: orientation, the layout (periphery or free) with
legalisation, and the channel rule.  :func:`choose_layout` decides what ``"auto"`` means."""

from __future__ import annotations

import time

import numpy as np

from ..design import CELL, CLUSTER, MOVABLE, Design, Floorplan
from ..metrics import default_channel, hpwl
from .legalize import legalize_macros
from .macro_arrays import ArrayPlan, macro_arrays
from .macro_greedy import greedy_arrays
from .options import PlacerOptions
from .orient import choose_orientations
from .periphery import (
    close_channels,
    compact,
    fill_pockets,
    orient_mask_inward,
    push_to_edges,
)
from .stages import Progress, report

__all__ = ["AUTO_MAX_MACROS", "AUTO_MIN_SHARE", "arrange_macros", "channel_width",
           "choose_layout", "place_arrays"]


AUTO_MAX_MACROS = 128     # "auto" arranges at most this many movable macros on the periphery


AUTO_MIN_SHARE = 0.002    # ... each at least this share of the core area on average
AUTO_MIN_BANKED = 0.5     # otherwise "arrays" when this share of them belong to banks
ARRAY_ROUNDS = 2          # the arrays placed, the logic spread around them, this many times


def choose_layout(design: Design, fp: Floorplan, macros: np.ndarray, layout: str) -> str:
    """The macro arrangement ``"auto"`` stands for.

    ``"periphery"`` for designs whose movable macros are hard blocks in the floorplanning
    sense — at most :data:`AUTO_MAX_MACROS` of them, with a mean area of at least
    :data:`AUTO_MIN_SHARE` of the core (memories, PHYs; the common-practice rule then applies);
    ``"arrays"`` for more or smaller macros of which at least :data:`AUTO_MIN_BANKED` belong
    to banks of identical macros (:func:`~floorwidget.placer.macro_arrays.macro_arrays`: a
    cache's memories), placed as arrays around the logic (:func:`place_arrays`); and
    ``"free"`` for netlists where "macros" are hundreds of unrelated small blocks mixed with
    the logic (e.g. the IBM mixed-size suite), where pushing them anywhere costs wirelength
    for nothing.  DEVELOPERS.md gives the measurements behind the thresholds.
    """
    if layout != "auto":
        return layout
    if not len(macros):
        return "free"
    c = design.core
    share = float(np.mean(design.width[macros] * design.height[macros])) / float(
        (c[2] - c[0]) * (c[3] - c[1]))
    if len(macros) <= AUTO_MAX_MACROS and share >= AUTO_MIN_SHARE:
        return "periphery"
    banked = sum(len(a) for a in macro_arrays(design, fp, macros) if len(a) > 1)
    return "arrays" if banked >= AUTO_MIN_BANKED * len(macros) else "free"


def arrange_macros(design: Design, out: Floorplan, macros: np.ndarray, opts: PlacerOptions,
                    info: dict, progress: Progress) -> Floorplan:
    """Orientation (pins toward the logic, then HPWL), the layout (periphery or free) with
    legalisation, and the channel rule, as the timed stages ``"orient"`` and ``"legalize"``."""
    layout = choose_layout(design, out, macros, opts.macro_layout)
    info["macro_layout"] = layout
    t0 = time.perf_counter()
    if opts.orient:
        out = choose_orientations(design, out, macros=macros,
                                  restrict=inward_masks(design, out, macros))
    info["stage_seconds"]["orient"] = time.perf_counter() - t0
    report(progress, "orient", 1.0, {})
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
                                  restrict=inward_masks(design, out, macros))
    info["stage_seconds"]["legalize"] = time.perf_counter() - t0
    report(progress, "legalize", 1.0, {})
    return out


def place_arrays(design: Design, out: Floorplan, macros: np.ndarray, opts: PlacerOptions,
                 info: dict, progress: Progress) -> Floorplan:
    """The ``"arrays"`` layout from a global placement ``out`` in which the macros took no
    room: the macros as arrays of identical macros
    (:func:`~floorwidget.placer.macro_arrays.macro_arrays`), placed one array at a time by the
    wire mask (:func:`~floorwidget.placer.macro_greedy.greedy_arrays`; covering logic costs
    the design's wirelength per µm² of cell area), at least the channel apart, legalised, pins
    turned toward the logic (flips only), the channel rule applied; stage ``"legalize"``."""
    t0 = time.perf_counter()
    soft = ((design.kind == CELL) | (design.kind == CLUSTER)) & (out.status == MOVABLE)
    area = float(np.sum(design.width[soft] * design.height[soft]))
    displace = hpwl(design, out) / area if area > 0 else 0.0
    plan = ArrayPlan.build(design, out, macro_arrays(design, out, macros), info["channel"])
    k = len(plan.members)
    arranged = greedy_arrays(design, out, plan, displace=displace)
    arranged = legalize_macros(plan.design, arranged, macros=np.arange(k))
    out = plan.expand(out, arranged)
    out = legalize_macros(design, out, macros=macros)  # (unchanged when the arrays were legal)
    out = close_channels(design, out, macros, info["channel"])
    if opts.orient:
        out = choose_orientations(design, out, macros=macros, swap=False,
                                  restrict=inward_masks(design, out, macros))
    info["arrays"] = [len(m) for m in plan.members]
    info["stage_seconds"]["legalize"] = info["stage_seconds"].get("legalize", 0.0) + \
        time.perf_counter() - t0
    report(progress, "legalize", 1.0, {})
    return out


def channel_width(design: Design, opts: PlacerOptions) -> float:
    """The channel rule's width: the option, or the design's default."""
    return default_channel(design) if opts.channel is None else float(opts.channel)


def inward_masks(design: Design, fp: Floorplan, macros: np.ndarray) -> np.ndarray:
    """Orientation masks (per block) whose pins do not face the macro's nearest core edge."""
    m = np.full(design.num_blocks, 0xFF, np.int64)
    m[macros] = orient_mask_inward(design, fp, np.sort(macros))[np.argsort(np.argsort(macros))]
    return m
