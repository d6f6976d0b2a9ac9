"""Early-floorplanning figures: wirelength, bin density and overflow, RUDY congestion, legality
and the floorplan's shape, one module per family.

Every function here is a pure, vectorised function of ``(design, floorplan)``; nothing imports
ipywidgets or bqplot.  The figures are *estimates* for comparing floorplans early on; sign-off
belongs to the full implementation flow's timing, power and physical checks.

Modules
-------
wirelength
    Pin positions, net boxes, HPWL.
density
    The bin grid, exact rectangle area per bin, utilisation and overflow.
congestion
    RUDY demand per bin (Spindler, Johannes, DATE 2007) and its peak and 99th percentile.
legality
    Macros under the halo rule, in the core, off blockages, on the grid; cells on rows.
shape
    Channels between facing macros, pins facing a wall, the periphery, logic regions.
report
    :func:`evaluate`, every report key at once.

The rectangle rules (overlap, union, halo rule) are :mod:`floorwidget.kernels.rects`, shared
with the macro legaliser.  Every public name of the modules is importable from here.
"""

from __future__ import annotations

from ..kernels.rects import TOL
from .congestion import (
    ASSUMED_TRACKS,
    congestion_map,
    congestion_of_boxes,
    congestion_stats,
    routing_supply,
    rudy_map,
    rudy_of_boxes,
)
from .density import (
    MAX_BINS,
    BinGrid,
    DensityMap,
    bin_grid,
    density_map,
    density_overflow,
    peak_density,
    rect_area_map,
    utilization,
)
from .legality import cell_legality, illegal_blocks, legality, pinned_illegal, row_of
from .report import (
    QUICK_KEYS,
    REPORT_KEYS,
    blockages_over_cap,
    evaluate,
    quick_figures,
    straps_blocked,
)
from .shape import (
    Channels,
    LogicRegions,
    channel_gaps,
    default_channel,
    facing_wall,
    logic_regions,
    macros_facing_wall,
    narrow_channels,
    nearest_wall,
    periphery_macros,
    pin_side,
    wall_bars,
)
from .wirelength import hpwl, net_boxes, net_hpwl, nets_hpwl, pin_positions

__all__ = [
    "MAX_BINS",
    "QUICK_KEYS",
    "REPORT_KEYS",
    "TOL",
    "BinGrid",
    "Channels",
    "DensityMap",
    "LogicRegions",
    "bin_grid",
    "cell_legality",
    "channel_gaps",
    "ASSUMED_TRACKS",
    "congestion_map",
    "congestion_of_boxes",
    "congestion_stats",
    "routing_supply",
    "default_channel",
    "density_map",
    "density_overflow",
    "blockages_over_cap",
    "straps_blocked",
    "evaluate",
    "facing_wall",
    "hpwl",
    "illegal_blocks",
    "legality",
    "logic_regions",
    "macros_facing_wall",
    "narrow_channels",
    "nearest_wall",
    "net_boxes",
    "net_hpwl",
    "nets_hpwl",
    "peak_density",
    "periphery_macros",
    "pinned_illegal",
    "pin_positions",
    "pin_side",
    "quick_figures",
    "rect_area_map",
    "row_of",
    "rudy_map",
    "rudy_of_boxes",
    "utilization",
    "wall_bars",
]
