"""The canvas's bottom raster: heat images (cells, density, congestion) and the logic picture
coloured by hierarchy group (:class:`CanvasHeat`, a part of
:class:`~floorwidget.widget.canvas.Canvas`)."""

from __future__ import annotations

import numpy as np

from .. import hierarchy as hier
from ..design import MACRO, TERMINAL, Floorplan
from ..style import GROUP_PALETTE, OTHER_GROUP
from . import geometry as geo


class CanvasHeat:
    """Heat layers and colours by hierarchy group."""

    def heat_values(self, name: str, fp: Floorplan | None = None) -> np.ndarray:
        """The ``(nx, ny)`` map of heat layer ``name`` on the display grid.

        ``density`` is :func:`floorwidget.metrics.density_map` utilisation, ``congestion`` is
        :func:`floorwidget.metrics.congestion_map` (RUDY demand over routing supply, 1.0 =
        full; Spindler, Johannes, DATE 2007), ``cells``
        the soft-cluster and standard-cell area per bin over the bin area.
        """
        from .. import metrics

        d = self.design
        fp = self.fp if fp is None else fp
        if name == "density":
            return metrics.density_map(d, fp, self.grid).utilisation
        if name == "congestion":
            return metrics.congestion_map(d, fp, self.grid)
        soft = (d.kind != MACRO) & (d.kind != TERMINAL)
        # a drop moves macros only: the cells' map is reused while they stay put (bit for bit)
        key = (self.grid, fp.x[soft], fp.y[soft], fp.orient[soft])
        last = getattr(self, "_cells_map", None)
        if last is not None and last[0][0] is key[0] and all(
                np.array_equal(a, b) for a, b in zip(last[0][1:], key[1:])):
            return last[1]
        v = metrics.rect_area_map(self.grid, fp.rects()[soft]) / self.grid.bin_area
        self._cells_map = (key, v)
        return v

    def show_heat(self, name: str | None) -> None:
        """Show heat layer ``name`` (``"density"`` or ``"congestion"``), or the cells layer."""
        self.heat = name
        for k in ("density", "congestion"):
            self.marks[k].visible = k == name
        if name is not None:
            self._draw_heat(name)
        self.marks["cells"].visible = name is None and self._has_soft and not self.colour_groups
        self.marks["groups"].visible = name is None and self._has_soft and self.colour_groups
        if name is None and self.colour_groups:
            self._draw_groups()

    def _draw_heat(self, name: str) -> None:
        v = self.heat_values(name)
        mk = self.marks[name]
        hi = float(v.max()) if v.size else 1.0
        hi = hi if hi > 0 else 1.0
        if name == "cells":  # a quiet background: only the lighter part of the ramp
            hi *= 2.0
        with mk.hold_sync():
            mk.color = v.T
            mk.scales["color"].max = hi

    def _draw_cells(self):
        """Refresh whichever heat image is showing."""
        if self.heat is not None:
            self._draw_heat(self.heat)
        elif self.colour_groups:
            self._draw_groups()
        elif self._has_soft:
            self._draw_heat("cells")

    def set_groups(self, depth: int = 1, separators: str = hier.SEPARATORS,
                   redraw: bool = True) -> None:
        """Group the blocks by hierarchy (:func:`floorwidget.hierarchy.hierarchy_groups`).

        Colours (when shown), the flyline bundles to logic and the focus group follow
        (``redraw=False``: drawn by the caller's next call, e.g. :meth:`colour_by_groups`).
        """
        self._groups = hier.hierarchy_groups(self.design.names, depth, separators)
        self.focus_group = None
        self._target_of = None
        self._bundle_cache = {}
        if not redraw:
            return
        if self.colour_groups:
            self.colour_by_groups(True)
        elif self.interactive:
            self._draw_flylines()

    @property
    def groups(self) -> hier.Groups:
        """Hierarchy groups of every block (:func:`floorwidget.hierarchy.hierarchy_groups`,
        depth 1 until :meth:`set_groups`); flylines bundle per group, and
        :meth:`colour_by_groups` colours by them."""
        if self._groups is None:
            self._groups = hier.hierarchy_groups(self.design.names, 1)
        return self._groups

    def group_weights(self) -> np.ndarray:
        """Block area of each hierarchy group (:func:`floorwidget.hierarchy.group_area`)."""
        return hier.group_area(self.design, self.groups)

    def colour_by_groups(self, on: bool = True) -> None:
        """Colour macros and the logic area by hierarchy group (``False``: by status).

        The :data:`~floorwidget.style.GROUP_PALETTE` colours go to the groups with most area;
        all other groups are grey (:data:`~floorwidget.style.OTHER_GROUP`).  The outlines
        still carry the status.  ``group_legend`` lists every group under its colour.
        """
        self.colour_groups = bool(on)
        if on:
            self.group_colours, self.group_legend = hier.group_colours(
                self.group_weights(), GROUP_PALETTE, OTHER_GROUP)
        self.marks["groups"].visible = bool(on) and self._has_soft and self.heat is None
        self.marks["cells"].visible = not on and self._has_soft and self.heat is None
        self.update(self.fp, self._illegal)

    def group_rgba(self, fp: Floorplan | None = None) -> np.ndarray:
        """The logic picture on the heat grid (:func:`floorwidget.hierarchy.logic_picture`)."""
        fp = self.fp if fp is None else fp
        cols = self.group_colours or [OTHER_GROUP] * len(self.groups)
        return hier.logic_picture(self.design, fp, self.grid, self.groups, cols,
                                  focus=self.focus_group, other=OTHER_GROUP)

    def _draw_groups(self) -> None:
        mk = self.marks["groups"]
        if not self._has_soft:
            return
        import ipywidgets as W

        # a new image widget each time: the browser view redraws on a new `image`, not on a
        # change of the old widget's bytes (seen in JupyterLab with bqplot 0.13)
        old = mk.image
        mk.image = W.Image(value=geo.png_rgba(self.group_rgba()), format="png")
        old.close()
