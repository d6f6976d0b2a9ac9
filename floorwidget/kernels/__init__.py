"""The lowest layer: small numeric kernels that several layers share, so that one rule has one
implementation (orientation, rectangles and the halo rule, polygons, validation, number
formatting).  Kernels import numpy/scipy only, never another floorwidget module."""
