"""Quadratic placement for floorwidget: Bound2Bound net model, sparse conjugate-gradient solve,
look-ahead spreading, macro orientation and legalisation, and the flow that ties them together.

The results are early-floorplanning estimates; sign-off belongs to the full implementation
flow's timing, power and physical checks.

>>> from floorwidget.placer import place, refine, legalize   # doctest: +SKIP
"""

from __future__ import annotations

from . import legalize as _legalize_module  # noqa: F401  (import the submodules first, so
from . import orient as _orient_module  # noqa: F401  their names never shadow the functions)
from .coarsen import Clustering, coarsen
from .errors import PlacementError, PlacementWarning
from .flow import legalize, place, refine
from .multilevel import expand
from .options import PlacerOptions, make_options

__all__ = ["Clustering", "PlacementError", "PlacementWarning", "PlacerOptions", "coarsen",
           "expand", "legalize", "make_options", "place", "refine"]
