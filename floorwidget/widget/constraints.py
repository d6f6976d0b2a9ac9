"""The Constraints tab: placement blockages (drawn in the "Draw blockage" mode, each with a
handle to select and move it; position and density typed here) and the halo of the selected
macros.  Session calls only; the placer honours them on the next run."""

from __future__ import annotations

import ipywidgets as W
import numpy as np

from ..session import ChangeEvent
from .context import Context, small_text

__all__ = ["ConstraintsPanel"]


class ConstraintsPanel:
    """Owns the blockage and halo controls; follows the Session and the selection."""

    def __init__(self, ctx: Context):
        self.ctx = ctx
        b = ctx.button
        small = {"description_width": "initial"}
        self.new_density = W.BoundedFloatText(
            value=0.0, min=0.0, max=1.0, step=0.05, description="new: max density",
            style=small, layout=W.Layout(width="170px"),
            tooltip="0: a full blockage (no macro, no cell); above 0: a partial one where "
                    "cells fill at most this share of the area")
        self.pick = W.Dropdown(layout=W.Layout(width="200px"),
                               tooltip="The selected placement blockage")
        self._quiet = False
        self.pick.observe(lambda ch: None if self._quiet else ctx.ui(
            lambda: self.select(ch["new"])), "value")
        self.x = W.FloatText(description="x", style=small, layout=W.Layout(width="100px"),
                             tooltip="Lower-left corner x, µm")
        self.y = W.FloatText(description="y", style=small, layout=W.Layout(width="100px"),
                             tooltip="Lower-left corner y, µm")
        self.density = W.BoundedFloatText(
            value=0.0, min=0.0, max=1.0, step=0.05, description="max density", style=small,
            layout=W.Layout(width="140px"), tooltip="0: full; above 0: partial")
        for wdg, cls in ((self.new_density, "fw-new-density"), (self.x, "fw-blockage-x"),
                         (self.y, "fw-blockage-y"), (self.density, "fw-blockage-density")):
            wdg.add_class(cls)
        put = b("Apply", self._apply, "Move the selected blockage to x, y and give it this "
                "density (one undo step)")
        rm = b("Delete blockage", self._remove, "Remove the selected blockage")
        self.halo_fields = [W.FloatText(description=s, style=small,
                                        layout=W.Layout(width="76px"),
                                        tooltip=f"Halo {t} of the placed footprint, µm")
                            for s, t in (("L", "left"), ("B", "bottom"), ("R", "right"),
                                         ("T", "top"))]
        for f, cls in zip(self.halo_fields, ("l", "b", "r", "t")):
            f.add_class(f"fw-halo-{cls}")
        halo = b("Set halo", self._apply_halo, "Give the selected macros this keep-out on "
                 "each side (one undo step)")
        self.box = W.VBox([
            W.HTML("<b>Placement blockages</b>"),
            W.HBox([self.new_density, small_text("mode Draw blockage: drag a rectangle")]),
            W.HBox([self.pick, rm]), W.HBox([self.x, self.y]), W.HBox([self.density, put]),
            W.HTML("<b>Halo of the selected macros</b>"),
            W.HBox(self.halo_fields[:2]), W.HBox(self.halo_fields[2:] + [halo]),
            small_text("The placer honours blockages and halos on the next Place all or "
                       "Refine.")])
        bh = ctx.canvas.marks["blockage_handles"]
        bh.on_drag_end(lambda _m, ev: ctx.ui(lambda: self.drop(
            ev["index"], ev["point"]["x"], ev["point"]["y"])))
        bh.on_element_click(lambda _m, ev: ctx.ui(lambda: self.select(ev["index"])))
        ctx.session.on_change(self._on_change)
        ctx.on_select(self._refresh_halo)
        self.refresh()
        self._refresh_halo()

    def _on_change(self, ev: ChangeEvent) -> None:
        if ev.floorplan.design is not self._shown:
            self.refresh()
        if ev.action not in ("snapshot", "add_alternative"):
            self._refresh_halo()

    def draw(self, x0: float, y0: float, x1: float, y1: float) -> int:
        """Add a placement blockage over the rectangle with corners ``(x0, y0)``, ``(x1, y1)``
        (clipped to the die) with the panel's "new: max density"; it becomes the selected
        blockage."""
        self.ctx.refuse_if_busy()
        die = self.ctx.design.die
        xs = np.clip([x0, x1], die[0], die[2])
        ys = np.clip([y0, y1], die[1], die[3])
        k = self.ctx.session.add_blockage([xs[0], ys[0], xs[1], ys[1]],
                                          max_density=float(self.new_density.value))
        self.select(k)
        r = self.ctx.design.blockages[k]
        self.ctx.notify(f"Added blockage {k}: {r[2] - r[0]:.1f} × {r[3] - r[1]:.1f} µm at "
                        f"({r[0]:.1f}, {r[1]:.1f}).")
        return k

    def select(self, k) -> None:
        """Select placement blockage ``k`` (``None``: none) for the editor."""
        n = len(self.ctx.design.blockages)
        if k is not None and (isinstance(k, bool) or not isinstance(k, (int, np.integer))
                              or not 0 <= int(k) < n):
            raise ValueError(f"blockage {k!r}: no such placement blockage (there are {n})")
        self.ctx.canvas.select_blockage(None if k is None else int(k))
        self.refresh()

    def drop(self, k: int, x: float, y: float) -> None:
        """A blockage handle dropped at centre ``(x, y)``: :meth:`Session.move_blockage` (a
        click, less than half a pixel, only selects it)."""
        self.ctx.refuse_if_busy()
        c = self.ctx.canvas
        b = self.ctx.design.blockages[int(k)]
        cx, cy = (b[0] + b[2]) / 2, (b[1] + b[3]) / 2
        ppu = c.px_per_um
        self.select(int(k))
        if abs(x - cx) * ppu < 0.5 and abs(y - cy) * ppu < 0.5:
            return
        try:
            self.ctx.session.move_blockage(int(k), b[0] + x - cx, b[1] + y - cy)
        finally:
            c._draw_blockages()  # put the handle back when the move is refused

    def _apply(self) -> None:
        k = self.ctx.canvas.blockage_selected
        if k is None:
            raise ValueError("Select a blockage first (click its square handle, or pick it "
                             "from the list).")
        self.ctx.refuse_if_busy()
        s = self.ctx.session
        b, md = s.design.blockages[k], float(s.design.blockage_max_density[k])
        x, y, dens = (float(w.value) for w in (self.x, self.y, self.density))
        with s.batch(f"edit blockage {k}"):
            if (x, y) != (float(b[0]), float(b[1])):
                s.move_blockage(k, x, y)
            if dens != md:
                s.set_blockage_density(k, dens)

    def _remove(self) -> None:
        k = self.ctx.canvas.blockage_selected
        if k is None:
            raise ValueError("Select a blockage first.")
        self.ctx.refuse_if_busy()
        self.ctx.canvas.blockage_selected = None
        self.ctx.session.remove_blockage(k)

    def _apply_halo(self) -> None:
        names = self.ctx.selected_names()
        self.ctx.refuse_if_busy()
        self.ctx.session.set_halo(names, [float(f.value) for f in self.halo_fields])
        self.ctx.notify(f"Halo set on "
                        f"{names[0] if len(names) == 1 else f'{len(names)} macros'}.")

    def _refresh_halo(self) -> None:
        """The halo editor shows the first selected macro's halo."""
        sel = self.ctx.canvas.selected
        for f, v in zip(self.halo_fields,
                        self.ctx.design.halo[sel[0]] if sel.size else np.zeros(4)):
            f.value = float(v)
        self.ctx.buttons["Set halo"].disabled = not sel.size

    def refresh(self) -> None:
        """The blockage list and editor from the session's design and the canvas selection."""
        d, k = self.ctx.design, self.ctx.canvas.blockage_selected
        self._shown = d
        bl, md = d.blockages, d.blockage_max_density
        opts = [(f"{j}: {'full' if md[j] <= 0 else f'≤ {md[j]:.0%}'} "
                 f"{bl[j, 2] - bl[j, 0]:.0f}×{bl[j, 3] - bl[j, 1]:.0f} µm", j)
                for j in range(len(bl))]
        self._quiet = True
        try:
            self.pick.options = [("(no blockage selected)", None)] + opts
            self.pick.value = k
        finally:
            self._quiet = False
        for w in (self.x, self.y, self.density, self.ctx.buttons["Apply"],
                  self.ctx.buttons["Delete blockage"]):
            w.disabled = k is None
        if k is not None:
            self.x.value, self.y.value = float(bl[k, 0]), float(bl[k, 1])
            self.density.value = float(md[k])
