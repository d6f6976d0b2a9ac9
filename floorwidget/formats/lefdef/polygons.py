"""Rectilinear polygons as disjoint rectangles (DEF ``DIEAREA`` and ``BLOCKAGES POLYGON``): the
plane sweep of :func:`floorwidget.kernels.polygon.polygon_rects`, O(n log n)."""

from __future__ import annotations

from ...kernels.polygon import polygon_rects as _polygon_rects

__all__ = ["_polygon_rects"]
