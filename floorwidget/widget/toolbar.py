"""The toolbar above the canvas: what a mouse drag does (the mode), the placer runs, the edits
of the selection, undo and redo, the view's zoom, and the progress of a run."""

from __future__ import annotations

from collections.abc import Callable

import ipywidgets as W

from ._style import ui_colors
from .context import Context

__all__ = ["MODES", "Toolbar"]

#: What a mouse drag on the canvas does.  bqplot's interaction layer lies over the marks, so
#: moving macros and panning cannot share one mode.
MODES = {
    "Move macros": "Drag a macro's (or a blockage's) handle to move it",
    "Pan / zoom": "Drag to pan, wheel to zoom",
    "Box select": "Drag a box to select several macros",
    "Draw blockage": "Drag a rectangle to add a placement blockage",
    "Draw region": "Drag a rectangle to add a cell region (name and kind in the Regions tab)",
}


class Toolbar:
    """One wrapping row of compact controls.

    Parameters
    ----------
    ctx : Context
    runs : dict
        ``place``, ``refine``, ``legalize`` and ``expand``: the widget's run methods (they
        take ``wait=``).
    on_draw : callable
        ``on_draw(mode, x0, y0, x1, y1)`` when a drag ends in a drawing mode.
    """

    def __init__(self, ctx: Context, runs: dict[str, Callable], on_draw: Callable):
        import bqplot as bq

        self.ctx = ctx
        c, b = ctx.canvas, ctx.button
        self.on_draw = on_draw
        self.mode = W.ToggleButtons(options=list(MODES), value="Move macros",
                                    tooltips=list(MODES.values()),
                                    style={"button_width": "112px"})
        self.mode.add_class("fw-mode")
        self.mode.observe(self._mode_changed, "value")
        self.brush = bq.interacts.BrushSelector(x_scale=c.x_scale, y_scale=c.y_scale,
                                                marks=[c.marks["handles"]],
                                                color=ui_colors()["selection"])
        self.draw_brush = bq.interacts.BrushSelector(x_scale=c.x_scale, y_scale=c.y_scale,
                                                     color=ui_colors()["blockage"])
        self.draw_brush.observe(self._on_draw_brush, names=["brushing"])
        # how "Place all" arranges the macros (the placer's macro_layout option)
        self.layout_style = W.Dropdown(
            options=[("auto", "auto"), ("periphery", "periphery"), ("free", "free")],
            value="auto", layout=W.Layout(width="96px"),
            tooltip="Macro arrangement for Place all: against the core boundary and each "
                    "other (periphery), where the wirelength puts them (free), or chosen per "
                    "design (auto)")
        runs_row = [b("Place all", lambda: runs["place"](wait=False),
                      "Global placement of every movable block (runs in the background)"),
                    self.layout_style,
                    b("Refine", runs["refine"], "Improve around the pinned macros"),
                    b("Legalise", runs["legalize"], "Remove macro overlaps, snap to grid")]
        if ctx.session.clustered:  # a large design shown as clusters: the cells on request
            runs_row.append(b("Expand cells", lambda: runs["expand"](wait=False),
                              "Place every standard cell of the full design around these "
                              "macros (in the background; the canvas keeps the clusters)"))
        edits = [b("Pin", lambda: self.on_selection("pin"), "Pin the selected macros"),
                 b("Unpin", lambda: self.on_selection("unpin"), "Make them movable"),
                 b("Rotate 90°", lambda: self.on_selection("rotate"),
                   "Quarter turn counter-clockwise"),
                 b("Flip", lambda: self.on_selection("flip"), "Mirror about the y axis"),
                 b("Undo", lambda: self._history("undo")),
                 b("Redo", lambda: self._history("redo"))]
        view = [b("Whole die", c.reset_view, "Zoom out to the die"),
                b("Zoom in", lambda: c.zoom(0.5), "Halve the view")]
        sep = [W.HTML("<span style='border-left:1px solid #bbb;margin:0 4px'></span>")]
        self.box = W.HBox([self.mode] + sep + runs_row + sep + edits + sep + view
                          + [ctx.runner.progress],
                          layout=W.Layout(flex_flow="row wrap", align_items="center",
                                          width="100%"))
        self.box.add_class("fw-toolbar")

    def _history(self, step: str) -> None:
        self.ctx.refuse_if_busy()
        getattr(self.ctx.session, step)()

    def on_selection(self, action: str) -> None:
        """Pin, unpin, rotate or flip the selected macros (one undo step)."""
        names = self.ctx.selected_names()
        self.ctx.refuse_if_busy()
        s = self.ctx.session
        if action in ("pin", "unpin"):
            getattr(s, action)(names)
            return
        with s.batch(f"{action} {len(names)} macro(s)" if len(names) > 1 else
                     f"{action} {names[0]}"):
            for nm in names:
                getattr(s, action)(nm)

    def _mode_changed(self, change) -> None:
        c = self.ctx.canvas
        c.figure.interaction = {"Move macros": None, "Pan / zoom": c.panzoom,
                                "Box select": self.brush, "Draw blockage": self.draw_brush,
                                "Draw region": self.draw_brush}[change["new"]]

    def _on_draw_brush(self, change) -> None:
        """A drag ended in a drawing mode: its rectangle goes to ``on_draw``."""
        if change["new"] or change["old"] is not True:  # act when a drag ends
            return
        br = self.draw_brush
        sx, sy = br.selected_x, br.selected_y
        if sx is None or sy is None or len(sx) != 2 or len(sy) != 2:
            return
        mode = self.mode.value
        self.ctx.ui(lambda: self.on_draw(mode, float(sx[0]), float(sy[0]), float(sx[1]),
                                         float(sy[1])))
        br.selected_x, br.selected_y = None, None  # the new shape is drawn by the canvas
