"""Power-grid edits of a session: set a grid from a specification, clear it.

The grid lives on the design like the blockages (:meth:`Design.derive` with ``power=``), so an
undo step, a snapshot and an alternative carry the grid they were made with; the placer honours
it on the next :meth:`~floorwidget.session.Session.place` or ``refine`` and the report counts
macros clipping a strap (``straps_blocked``) at once.  :class:`PowerEdits` is a mixin of
:class:`~floorwidget.session.Session`.
"""

from __future__ import annotations

from collections.abc import Mapping

from ..floorplan.power import GridSpec, build_grid
from .edits import locked

__all__ = ["PowerEdits"]


class PowerEdits:
    """Session methods for the power grid (a mixin of ``Session``)."""

    @locked
    def power_grid(self, spec: GridSpec | Mapping) -> GridSpec:
        """Lay the power grid ``spec`` (a :class:`~floorwidget.floorplan.power.GridSpec` or
        its dict form), replacing any grid the design had; one undo step, logged as
        ``session.power_grid({...})``.

        Returns
        -------
        GridSpec
            The specification as checked.

        Raises
        ------
        DesignError
            One line naming the power grid when it cannot fit (ring outside the die, pitch
            under width + spacing, unknown layer, layer direction mismatch, a bad value);
            nothing changes.
        """
        s = spec if isinstance(spec, GridSpec) else GridSpec.from_dict(dict(spec))
        shapes = build_grid(self.design, s)
        self._constrain("power_grid", ((s.to_dict(),),), power=shapes)
        return s

    @locked
    def clear_power_grid(self) -> None:
        """Remove the power grid (one undo step; nothing happens without one)."""
        if self.design.power is None:
            return
        self._constrain("clear_power_grid", ((),), power=None)
