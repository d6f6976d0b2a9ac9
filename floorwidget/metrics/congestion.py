"""Congestion: RUDY routing demand per bin and its summary figures.

**RUDY** (Spindler and Johannes, DATE 2007): each net spreads a demand density
``(w + h) / (w * h)`` uniformly over its bounding box, so that the box holds ``w + h`` = its
HPWL in total.  A box thinner than one bin in x (or y) is widened, about its centre, to one bin
width (height) while the net's total demand stays ``w + h``.  The map is *wire length per unit
area*, µm / µm² (= 1/µm), per bin; multiply by a bin's area for µm of wire in it.

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

__all__ = ["congestion_stats", "rudy_map", "rudy_of_boxes"]



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


def rudy_of_boxes(grid: BinGrid, box: np.ndarray) -> np.ndarray:
    """RUDY map (as :func:`rudy_map`) of given net boxes, ``(m, 4)`` rows ``xlo, ylo, xhi, yhi``.

    For a caller that has the boxes already (the report computes them once for HPWL too).
    """
    w = box[:, 2] - box[:, 0]
    h = box[:, 3] - box[:, 1]
    demand = w + h
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


def congestion_stats(rudy: np.ndarray) -> tuple[float, float]:
    """``(peak, 99th percentile)`` of a RUDY map."""
    if rudy.size == 0:
        return 0.0, 0.0
    v = rudy.ravel()
    q = 0.99 * (v.size - 1)  # the linear-interpolation rank np.percentile uses
    lo = int(np.floor(q))
    hi = min(lo + 1, v.size - 1)
    part = np.partition(v, [lo, hi])
    p99 = part[lo] + (part[hi] - part[lo]) * (q - lo)
    return float(v.max()), float(p99)


