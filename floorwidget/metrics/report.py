"""The report: every figure of a floorplan as plain JSON values (:func:`evaluate`).

The figures are early-floorplanning estimates for comparing alternatives; sign-off belongs to
the implementation flow's timing, power and physical checks.
"""

from __future__ import annotations

import numpy as np

from ..design import CELL, MACRO, Design, Floorplan
from ..kernels.fill import covered_share
from ..kernels.power import channel_conflicts
from .congestion import congestion_of_boxes, congestion_stats
from .density import bin_grid, density_map, utilization
from .legality import cell_legality, legality, pinned_illegal
from .shape import logic_regions, macros_facing_wall, narrow_channels
from .wirelength import net_boxes

__all__ = ["QUICK_KEYS", "REPORT_KEYS", "evaluate", "quick_figures"]

REPORT_KEYS = (
    "hpwl", "hpwl_weighted", "density_overflow", "peak_density", "congestion_peak",
    "congestion_p99", "rudy_peak", "rudy_p99", "macro_overlaps", "macro_overlap_area",
    "out_of_die", "off_grid", "legal",
    "num_blocks", "num_nets", "target_density", "cell_overlaps", "cells_off_row",
    "cells_off_site", "narrow_channels", "macros_facing_wall", "logic_regions",
    "largest_logic_region", "pinned_illegal", "blockages_over_cap", "straps_blocked",
    "utilization",
)

#: The report keys :func:`quick_figures` gives: those that need no bin map and no pass over the
#: standard cells' rows (net boxes and the macros only), so a readout can show them at once.
QUICK_KEYS = (
    "hpwl", "hpwl_weighted", "macro_overlaps", "macro_overlap_area", "out_of_die", "off_grid",
    "num_blocks", "num_nets", "target_density", "narrow_channels", "macros_facing_wall",
    "pinned_illegal", "straps_blocked", "utilization",
)


def blockages_over_cap(design: Design, fp: Floorplan, tol: float = 1e-6) -> int:
    """Partial blockages whose standard-cell fill (the share of their area the cells cover,
    :func:`floorwidget.kernels.fill.covered_share`) exceeds their maximum density."""
    md = design.blockage_max_density
    part = md > 0.0
    if not part.any():
        return 0
    cells = fp.rects()[design.kind == CELL]
    share = covered_share(design.blockages[part], cells)
    return int(np.count_nonzero(share > md[part] + tol))


def straps_blocked(design: Design, fp: Floorplan) -> int:
    """Macros that break the channel rule (:mod:`floorwidget.kernels.power`): a power strap
    on a low layer clips the macro's footprint instead of running beside it with its
    spacing or over it; 0 without a power grid."""
    g = design.power
    if g is None or not g.low_stripes().any():
        return 0
    _, m = channel_conflicts(g.rects[g.low_stripes()], g.spacing,
                             fp.rects()[design.kind == MACRO])
    return int(len(np.unique(m)))


def evaluate(design: Design, fp: Floorplan | None = None, target_density: float | None = None,
             bin_size: float | None = None, channel: float | None = None) -> dict:
    """Every report figure of a floorplan, as plain JSON-serialisable Python values.

    These are early-floorplanning estimates for comparing alternatives; sign-off belongs to the
    implementation flow's timing, power and physical checks.

    Parameters
    ----------
    design : Design
    fp : Floorplan, optional
        Default ``design.initial``.
    target_density : float, optional
        For the overflow figure; default the value the placer used (``fp.info``), else 0.8.
    bin_size : float, optional
        Bin side, µm (default from :func:`bin_grid`).
    channel : float, optional
        Smallest open channel between facing macros, µm, for ``narrow_channels``; default the
        one the placer used (``fp.info["channel"]``), else :func:`default_channel`.

    Returns
    -------
    dict
        Keys :data:`REPORT_KEYS`: ``hpwl`` and ``hpwl_weighted`` (µm), ``density_overflow``,
        ``peak_density``, ``congestion_peak`` and ``congestion_p99`` (routing demand over
        supply, 1.0 = full: :func:`congestion_map`), ``rudy_peak`` and ``rudy_p99`` (the raw
        RUDY demand, µm/µm²),
        ``macro_overlaps`` (pairs in conflict under the halo rule), ``macro_overlap_area`` (µm²),
        ``out_of_die`` (blocks), ``off_grid`` (macros), ``legal``, ``num_blocks``, ``num_nets``;
        the floorplan's shape: ``narrow_channels`` (:func:`channel_gaps`),
        ``macros_facing_wall`` (:func:`facing_wall`), ``logic_regions`` and
        ``largest_logic_region`` (:func:`logic_regions`); ``utilization``, cell and macro
        area over core area (:func:`utilization`).

    Examples
    --------
    >>> import floorwidget as fw
    >>> d = fw.load("demo_data/heron_dsp.json")   # doctest: +SKIP
    >>> sorted(fw.evaluate(d))[:3]                 # doctest: +SKIP
    ['congestion_p99', 'congestion_peak', 'density_overflow']
    """
    fp = design.initial if fp is None else fp
    quick, leg, box = _quick(design, fp, target_density, channel)
    td = quick["target_density"]
    grid = bin_grid(design, bin_size)
    dm = density_map(design, fp, grid)
    cong, rudy = congestion_of_boxes(design, grid, box, rudy=True)
    rpeak, rp99 = congestion_stats(rudy)
    peak, p99 = congestion_stats(cong)
    cl = cell_legality(design, fp)
    lr = logic_regions(design, fp)
    over = blockages_over_cap(design, fp)
    rest = {
        "density_overflow": dm.overflow(td),
        "peak_density": float(dm.utilisation.max()),
        "congestion_peak": peak,
        "congestion_p99": p99,
        "rudy_peak": rpeak,
        "rudy_p99": rp99,
        "legal": bool(leg["legal"]) and cl["cells_legal"] and over == 0,
        "cell_overlaps": cl["cell_overlaps"],
        "cells_off_row": cl["cells_off_row"],
        "cells_off_site": cl["cells_off_site"],
        "logic_regions": lr.count,
        "largest_logic_region": lr.largest,
        "blockages_over_cap": over,
    }
    return {k: quick[k] if k in quick else rest[k] for k in REPORT_KEYS}


def quick_figures(design: Design, fp: Floorplan | None = None,
                  target_density: float | None = None, channel: float | None = None) -> dict:
    """The report figures that are cheap on any design (:data:`QUICK_KEYS`): wirelength from
    the net boxes and the macro checks, equal to the same keys of :func:`evaluate` (same
    parameters), in a small part of its time; the readouts show them first after an edit.

    Early-floorplanning estimates, like the whole report.
    """
    fp = design.initial if fp is None else fp
    return _quick(design, fp, target_density, channel)[0]


def _quick(design: Design, fp: Floorplan, target_density: float | None,
           channel: float | None) -> tuple[dict, dict, np.ndarray]:
    """:func:`quick_figures`, the macro legality record and the net boxes (both reused by
    :func:`evaluate`)."""
    if target_density is None:
        target_density = float(fp.info.get("target_density", 0.8))
    box = net_boxes(design, fp)
    per = (box[:, 2] - box[:, 0]) + (box[:, 3] - box[:, 1])
    leg = legality(design, fp)
    quick = {
        "hpwl": float(per.sum()),
        "hpwl_weighted": float(np.dot(per, design.net_weight)),
        "macro_overlaps": int(leg["macro_overlaps"]),
        "macro_overlap_area": float(leg["macro_overlap_area"]),
        "out_of_die": int(len(leg["out_of_die"])),
        "off_grid": int(len(leg["off_grid"])),
        "num_blocks": int(design.num_blocks),
        "num_nets": int(design.num_nets),
        "target_density": float(target_density),
        "narrow_channels": narrow_channels(
            design, fp, fp.info.get("channel") if channel is None else channel),
        "macros_facing_wall": macros_facing_wall(design, fp),
        "pinned_illegal": ", ".join(pinned_illegal(design, fp, leg)),
        "straps_blocked": straps_blocked(design, fp),
        "utilization": utilization(design),
    }
    return quick, leg, box
