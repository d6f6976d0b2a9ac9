"""Congestion: RUDY routing demand per bin, the routing supply of the layers, and their ratio.

**RUDY** (Spindler and Johannes, DATE 2007): each net spreads a demand density
``(w + h) / (w * h)`` uniformly over its bounding box, so that the box holds ``w + h`` = its
HPWL in total.  A box thinner than one bin in x (or y) is widened, about its centre, to one bin
width (height) while the net's total demand stays ``w + h``.  The map is *wire length per unit
area*, µm / µm² (= 1/µm), per bin; multiply by a bin's area for µm of wire in it.

**Congestion** as an engineer reads it is demand over supply, 1.0 = full: the horizontal part
of each net's RUDY (``w / (w h)``) over the horizontal tracks per µm of the routing layers
(``Σ 1 / pitch`` over the layers whose preferred direction is horizontal), likewise vertical,
and the larger of the two per bin (:func:`congestion_map`).  The lowest routing layer is left
out of the supply: it carries the standard cells' own pins and wiring (common practice).  A
design without layer data gets an assumed stack (:data:`ASSUMED_TRACKS`), said so in
:func:`routing_supply`'s answer.  RUDY is a wirelength estimate; detours, vias and pin access
take more, so a map near 1.0 is already tight: an early-floorplanning estimate, not a routing
result.

References
----------
P. Spindler and F. M. Johannes, "Fast and accurate routing demand estimation for efficient
routability-driven placement", Design, Automation and Test in Europe (DATE), 2007.
"""

from __future__ import annotations

import numpy as np

from ..design import Design, Floorplan
from .density import BinGrid, bin_grid, rect_area_map
from .wirelength import net_boxes

__all__ = ["ASSUMED_TRACKS", "congestion_map", "congestion_of_boxes", "congestion_stats",
           "routing_supply", "rudy_map", "rudy_of_boxes"]

#: Without layer data: this many tracks per row height in each direction (two horizontal and
#: two vertical layers of a ten-track row; an assumption, not a technology figure).
ASSUMED_TRACKS = 20.0



def rudy_map(design: Design, fp: Floorplan, grid: BinGrid | None = None) -> np.ndarray:
    """RUDY routing-demand map, wire length per unit area (µm / µm²) per bin.

    Each net's pin bounding box ``w x h`` receives the uniform density ``(w + h) / (w h)``
    (Spindler and Johannes, DATE 2007), so it holds its HPWL ``w + h`` in total.  A box thinner
    than a bin along an axis is widened about its centre to one bin along that axis, keeping the
    total at ``w + h``; a net whose pins all coincide has no demand.  Boxes are clipped to the
    core.  Nets are not weighted.

    Parameters
    ----------
    design : Design
    fp : Floorplan
    grid : BinGrid, optional

    Returns
    -------
    (nx, ny) float64 array

    References
    ----------
    P. Spindler and F. M. Johannes, "Fast and accurate routing demand estimation for efficient
    routability-driven placement", DATE 2007.
    """
    grid = bin_grid(design) if grid is None else grid
    return rudy_of_boxes(grid, net_boxes(design, fp))


def rudy_of_boxes(grid: BinGrid, box: np.ndarray, part: str = "hv") -> np.ndarray:
    """RUDY map (as :func:`rudy_map`) of given net boxes, ``(m, 4)`` rows ``xlo, ylo, xhi, yhi``.

    For a caller that has the boxes already (the report computes them once for HPWL too).
    ``part`` "h" keeps only the horizontal demand ``w``, "v" the vertical ``h``, "hv" both.
    """
    w = box[:, 2] - box[:, 0]
    h = box[:, 3] - box[:, 1]
    demand = (w if "h" in part else 0.0) + (h if "v" in part else 0.0)
    ew = np.maximum(w, grid.bw)
    eh = np.maximum(h, grid.bh)
    cx = (box[:, 0] + box[:, 2]) / 2
    cy = (box[:, 1] + box[:, 3]) / 2
    rects = np.stack([cx - ew / 2, cy - eh / 2, cx + ew / 2, cy + eh / 2], axis=1)
    dens = demand / (ew * eh)
    m = rect_area_map(grid, rects, dens)
    np.maximum(m, 0.0, out=m)  # round-off of the running sums
    m /= grid.bin_area
    return m


def routing_supply(design: Design) -> tuple[float, float, bool]:
    """Routing supply ``(horizontal, vertical, assumed)``: tracks per µm across each direction
    (µm of wire per µm² of area), from ``design.routing_layers`` without the lowest layer, or
    :data:`ASSUMED_TRACKS` per median row height (per 1 % of the shorter core side without
    rows) in each direction when the design has no layer data (``assumed`` True)."""
    layers = list(design.routing_layers)[1:]
    sh = sum(1.0 / p for _, d, p in layers if d == "H" and p > 0)
    sv = sum(1.0 / p for _, d, p in layers if d == "V" and p > 0)
    if sh > 0 and sv > 0:
        return sh, sv, False
    if len(design.row_height):
        unit = float(np.median(design.row_height))
    else:
        c = design.core
        unit = 0.01 * float(min(c[2] - c[0], c[3] - c[1]))
    s = ASSUMED_TRACKS / max(unit, 1e-12)
    return s, s, True


def congestion_of_boxes(design: Design, grid: BinGrid, box: np.ndarray,
                        rudy: bool = False):
    """Demand over supply per bin (1.0 = full): the larger of the horizontal RUDY over the
    horizontal supply and the vertical over the vertical (:func:`routing_supply`).  With
    ``rudy`` also the plain RUDY map (their sum), from the same two maps: ``(congestion,
    rudy)``."""
    sh, sv, _ = routing_supply(design)
    h, v = rudy_of_boxes(grid, box, "h"), rudy_of_boxes(grid, box, "v")
    cong = np.maximum(h / sh, v / sv)
    return (cong, h + v) if rudy else cong


def congestion_map(design: Design, fp: Floorplan, grid: BinGrid | None = None) -> np.ndarray:
    """Routing demand over supply per bin (:func:`congestion_of_boxes`), 1.0 = full.

    Parameters
    ----------
    design : Design
    fp : Floorplan
    grid : BinGrid, optional

    Returns
    -------
    (nx, ny) float64 array

    References
    ----------
    P. Spindler and F. M. Johannes, DATE 2007 (RUDY, the demand).
    """
    grid = bin_grid(design) if grid is None else grid
    return congestion_of_boxes(design, grid, net_boxes(design, fp))


def congestion_stats(rudy: np.ndarray) -> tuple[float, float]:
    """``(peak, 99th percentile)`` of a map (RUDY or congestion)."""
    if rudy.size == 0:
        return 0.0, 0.0
    v = rudy.ravel()
    q = 0.99 * (v.size - 1)  # the linear-interpolation rank np.percentile uses
    lo = int(np.floor(q))
    hi = min(lo + 1, v.size - 1)
    part = np.partition(v, [lo, hi])
    p99 = part[lo] + (part[hi] - part[lo]) * (q - lo)
    return float(v.max()), float(p99)


