"""Errors raised by the placer."""

from __future__ import annotations

from ..design import DesignError


class PlacementError(DesignError):
    """The placement asked for cannot be made (e.g. macros need more room than the core has,
    or pinned macros overlap each other).  The input floorplan is left exactly as it was."""


class PlacementWarning(UserWarning):
    """The placer changed something it was asked for (e.g. a target density too low for the
    design) and says so."""
