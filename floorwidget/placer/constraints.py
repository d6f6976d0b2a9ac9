"""What hand-drawn constraints take from the placer's capacity: partial placement blockages.

A full blockage (maximum density 0) is an obstacle like a fixed macro: every placer stage
already takes its area out.  A *partial* blockage with maximum density ``d`` (DEF
``+ PARTIAL``, as a fraction) lets standard cells and clusters fill at most ``d`` of its area,
so a bin under it holds ``d`` instead of the target density there: its capacity loses
``max(0, target − d)`` times the covered area.  The spreading (look-ahead) and the density cap
of detailed placement both subtract this loss; macros are not kept off partial blockages.
"""

from __future__ import annotations

import numpy as np

from ..design import Design
from ..metrics import BinGrid, rect_area_map

__all__ = ["partial_capacity_loss"]


def partial_capacity_loss(design: Design, grid: BinGrid, target: float) -> np.ndarray:
    """``(nx, ny)`` capacity (µm²) that the partial blockages take from each bin at density
    ``target``: ``Σ max(0, target − d_k) × area of blockage k in the bin``.  Overlaps with
    other obstacles are counted again (callers clip the capacity at zero)."""
    md = design.blockage_max_density
    part = md > 0.0
    loss = np.maximum(float(target) - md[part], 0.0)
    keep = loss > 0.0
    if not keep.any():
        return np.zeros(grid.shape)
    return np.maximum(rect_area_map(grid, design.blockages[part][keep], loss[keep]), 0.0)
