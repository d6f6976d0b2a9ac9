"""The canvas's constraint layers: placement blockages, the power grid and cell regions
(:class:`CanvasConstraints`, a part of :class:`~floorwidget.widget.canvas.Canvas`)."""

from __future__ import annotations

import numpy as np

from . import geometry as geo
from .canvas_layers import set_list


class CanvasConstraints:
    """Blockages (full and partial, the selected one, their handles), power and regions."""

    def _draw_blockages(self) -> None:
        """The blockages of ``self.design``: full and partial marks, handles, the selection."""
        d, m = self.design, self.marks
        bl, md = d.blockages, d.blockage_max_density
        if self.blockage_selected is not None and self.blockage_selected >= len(bl):
            self.blockage_selected = None
        for name, rows in (("blockages", md <= 0), ("blockages_partial", md > 0)):
            mk = m[name]
            if not rows.any():
                mk.visible = False
                continue
            x, y = geo.rect_rows(bl[rows])
            # a partial blockage's fill is as opaque as the share it keeps free of cells
            op = np.where(md[rows] > 0, (1.0 - md[rows]), 1.0) * self.ui["blockage_opacity"]
            with mk.hold_sync():
                mk.x, mk.y = x, y
                set_list(mk, "fill_colors", [self.ui["blockage_fill"]] * len(x))
                set_list(mk, "fill_opacities", [float(v) for v in op])
                mk.visible = True
        k = self.blockage_selected
        sel = m["blockage_selection"]
        if k is None:
            sel.visible = False
        else:
            x, y = geo.rect_rows(bl[k][None, :])
            with sel.hold_sync():
                sel.x, sel.y = x, y
                sel.visible = True
        h = m.get("blockage_handles")
        if h is not None:
            with h.hold_sync():
                if len(bl):
                    h.x = (bl[:, 0] + bl[:, 2]) / 2
                    h.y = (bl[:, 1] + bl[:, 3]) / 2
                h.visible = bool(len(bl))

    def select_blockage(self, k: int | None) -> None:
        """Outline blockage ``k`` (``None``: no blockage selected)."""
        self.blockage_selected = k
        self._draw_blockages()

    def show_power(self, on: bool = True) -> None:
        """Draw (or hide) the design's power grid: rings and straps as laid out for the
        current floorplan, VDD and VSS in their two colours; followpins are left out (one per
        row edge would outnumber everything else on the canvas)."""
        self.power_on = bool(on)
        self._draw_power()

    def _draw_power(self) -> None:
        from ..kernels.power import FOLLOWPIN

        g = self.design.power_shapes(self.fp) if self.power_on else None
        for k in (0, 1):
            mk = self.marks[f"power{k}"]
            sel = None if g is None else (g.net == k) & (g.shape != FOLLOWPIN)
            if sel is None or not sel.any():
                mk.visible = False
                continue
            x, y = geo.rect_rows(g.rects[sel])
            with mk.hold_sync():
                mk.x, mk.y = x, y
                set_list(mk, "fill_colors", [self.ui["power"][k]] * len(x))
                set_list(mk, "fill_opacities", [self.ui["power_opacity"]] * len(x))
                mk.visible = True

    def _draw_regions(self) -> None:
        """Cell regions of ``self.design``: outlines (fences solid, guides dashed) and each
        name at the top-left corner of its first rectangle, with the member count."""
        from ..design import FENCE

        reg, m = self.design.regions, self.marks
        kind_of = reg.kind[reg.rect_region()] if len(reg) else np.zeros(0)
        for name, rows in (("regions", kind_of == FENCE), ("regions_guide", kind_of != FENCE)):
            mk = m[name]
            if not rows.any():
                mk.visible = False
                continue
            x, y = geo.rect_rows(reg.rects[rows])
            with mk.hold_sync():
                mk.x, mk.y = x, y
                mk.visible = True
        lab = m["region_labels"]
        if not len(reg):
            lab.visible = False
            return
        first = reg.rects[reg.rect_start[:-1]]
        count = np.bincount(reg.member[reg.member >= 0], minlength=len(reg))
        with lab.hold_sync():
            lab.x, lab.y = first[:, 0], first[:, 3]
            lab.text = [f" {nm} ({'fence' if reg.kind[k] == FENCE else 'guide'}, "
                        f"{count[k]:,d})" for k, nm in enumerate(reg.names)]
            lab.visible = True
