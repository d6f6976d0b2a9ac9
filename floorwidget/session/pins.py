"""I/O pin assignment in a session: :meth:`assign_pins` (a mixin of
:class:`~floorwidget.session.Session`; the assignment is
:func:`floorwidget.floorplan.pins.assign_pins`).  A hand move of an I/O pin snaps to a slot in
:meth:`~floorwidget.session.edits.HandEdits.move`."""

from __future__ import annotations

from collections.abc import Iterable

from ..floorplan.pins import PinConstraints, assign_pins
from . import checks
from .edits import locked
from .history import changed

__all__ = ["PinCalls"]


class PinCalls:
    """Session methods for the I/O pins (a mixin of ``Session``)."""

    @locked
    def assign_pins(self, groups: Iterable[dict] | None = None, *,
                    corner_keepout: float | None = None,
                    held: Iterable[str] | None = None) -> int:
        """Assign the movable I/O pins to slots on the die edges for least wirelength, as
        one undoable step (pinned and fixed pins stay; :meth:`pin` one to hold it).

        Parameters
        ----------
        groups : list of dict, optional
            Pin groups: ``{"pattern": "axi_req_o[*]", "edges": ["top"], "span": [lo, hi],
            "ordered": True}`` (see :class:`floorwidget.floorplan.pins.PinGroup`).
        corner_keepout : float, optional
            µm without pins from each corner along every edge.
        held : list of str, optional
            Pins kept where they are.

        Returns
        -------
        int
            How many pins moved.

        Raises
        ------
        DesignError
            A bad constraint (one line naming the group); nothing changes.
        """
        kw = {}
        if groups is not None:
            kw["groups"] = checks.plain(list(groups), "groups")
        if corner_keepout is not None:
            kw["corner_keepout"] = checks.number(corner_keepout, "corner_keepout")
        if held is not None:
            kw["held"] = checks.name_list(held)
        cons = PinConstraints.from_plain(kw.get("groups"), kw.get("corner_keepout"),
                                         kw.get("held", ()))
        before = self._fp
        out = assign_pins(self.design, before, cons)
        moved = changed(before, out)
        self._commit("assign_pins", out, log=((), kw), blocks=moved)
        return len(moved)
