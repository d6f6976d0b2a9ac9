"""Tolerances and tuning constants of the macro legaliser (its rectangle rules are
:mod:`floorwidget.kernels.rects`, shared with the report)."""

from __future__ import annotations

_EPS = 1e-9  # tolerance in grid units when turning a distance into a number of pitches
_GRID_TOL = 1e-6  # µm, as in design.off_grid
_EVAL_CELLS = 1 << 18  # candidate x obstacle comparisons per numpy chunk
_T0 = 0.3  # initial annealing temperature, in median macro sides
_DISP_WEIGHT = 0.3  # weight of the quality term (as this much displacement), halved each run
_RUN_PER_MACRO = 5000  # most annealing moves per macro in one run (at most half the budget)
_SWAP_WINDOW = 0.01  # swap partners at most this fraction of the macros apart in a sequence
_POLISH_PER_MACRO = 200  # annealing moves per macro among legal packings, for the quality term
_SPREAD_MAX = 800  # most macros for the LP over every relation of the sequence pair
_RASTER_OBSTACLES = 2000  # from this many obstacles the nearest free spot is found on a map ...
_RASTER_CELLS = 1 << 24   # ... of the grid points, when the map has at most this many
_PACK_OBSTACLES = 512  # most obstacles in the sequence pair: more blockages are covered ...
_COVER_MAX_CELLS = 1 << 22  # ... by rectangles of a raster with at most this many cells
