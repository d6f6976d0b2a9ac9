"""The canvas's view: zoom, pan, the size on screen, and what depends on the zoom (placement
rows, macro labels) (:class:`CanvasView`, a part of :class:`~floorwidget.widget.canvas.Canvas`)."""

from __future__ import annotations

import numpy as np

from ..style import place_labels
from . import geometry as geo

_LABEL_PX_PER_CHAR = 6.2  # average width of one label character at 10 px (measured in Chromium)
_LABEL_LINE_PX = 12.0     # a label's line height at 10 px
_HANDLE_PX = 5.0          # labels keep this far above the centre of a macro (its handle)
_MAX_LABELS = 600         # most labels drawn at once


class CanvasView:
    """The visible span, its changes, and the layers drawn for it."""

    @property
    def px_per_um(self) -> float:
        """Screen pixels per µm at the current zoom (plot area over the visible span)."""
        span = float(self.y_scale.max) - float(self.y_scale.min)
        return (self._plot_px - 2 * self.margin) / max(span, 1e-12)

    def _set_view(self, cx: float, cy: float, side: float) -> None:
        """Show ``side`` µm along the plot's shorter side around ``(cx, cy)``, the longer side
        in proportion (µm stay square on screen)."""
        a = self._aspect
        hx, hy = (side * max(a, 1.0) / 2, side / min(a, 1.0) / 2)
        with self.figure.hold_sync():
            self.x_scale.min, self.x_scale.max = cx - hx, cx + hx
            self.y_scale.min, self.y_scale.max = cy - hy, cy + hy
        self._on_view()

    def _view_side(self) -> float:
        """The visible span along the plot's shorter side, µm."""
        return min(float(self.x_scale.max) - float(self.x_scale.min),
                   float(self.y_scale.max) - float(self.y_scale.min))

    def set_screen_size(self, width: float, height: float) -> None:
        """The figure's size on screen, pixels (from a browser event).

        The plot area takes the whole figure: its aspect follows the figure's, the spans
        follow (the view keeps its centre and its extent along the shorter side), and the
        labels are fitted again for the new size.
        """
        m = 2 * self.margin
        if min(width, height) <= m + 10:
            return
        aspect = (float(width) - m) / (float(height) - m)
        if abs(float(height) - self._plot_px) < 1.0 and abs(aspect / self._aspect - 1) < 0.01:
            return
        xs, ys = self.x_scale, self.y_scale
        cx, cy, side = (xs.min + xs.max) / 2, (ys.min + ys.max) / 2, self._view_side()
        self._plot_px, self._aspect = float(height), aspect
        with self.figure.hold_sync():
            f = self.figure  # bqplot checks min <= max on every assignment
            if aspect > f.max_aspect_ratio:
                f.max_aspect_ratio, f.min_aspect_ratio = aspect, aspect
            else:
                f.min_aspect_ratio, f.max_aspect_ratio = aspect, aspect
            self._set_view(cx, cy, side)

    def reset_view(self) -> None:
        """Back to the whole die."""
        xmin, xmax, ymin, ymax = self.home
        self._set_view((xmin + xmax) / 2, (ymin + ymax) / 2, xmax - xmin)

    def zoom(self, factor: float) -> None:
        """Scale the visible span by ``factor`` about its centre (0.5 halves it)."""
        xs, ys = self.x_scale, self.y_scale
        cx, cy = (xs.min + xs.max) / 2, (ys.min + ys.max) / 2
        hx, hy = (xs.max - xs.min) * factor / 2, (ys.max - ys.min) * factor / 2
        with self.figure.hold_sync():
            xs.min, xs.max = cx - hx, cx + hx
            ys.min, ys.max = cy - hy, cy + hy
        self._on_view()

    def show_box(self, xlo: float, ylo: float, xhi: float, yhi: float,
                 min_span: float | None = None) -> None:
        """Centre the view on a box and zoom so that it fills about a third of the view.

        The span is at least ``min_span`` (default: a fiftieth of the whole view) and at most
        the whole view.
        """
        hx0, hx1, _, _ = self.home
        full = hx1 - hx0
        lo = full / 50 if min_span is None else float(min_span)
        span = float(np.clip(3.0 * max(xhi - xlo, yhi - ylo), lo, full))
        self._set_view((xlo + xhi) / 2, (ylo + yhi) / 2, span)

    def _on_view(self, *_):
        self._draw_rows()
        self._draw_labels()
        self._draw_flylines()

    def _draw_rows(self):
        xs, ys = self.x_scale, self.y_scale
        if xs.min is None or ys.min is None:
            return
        d = self.design
        idx = geo.visible_rows(d, ys.min, ys.max, xs.min, xs.max)
        mk = self.marks["rows"]
        # faint rows only when a row is at least a few pixels tall
        if len(idx) == 0 or d.row_height[idx].min() * self.px_per_um < 4:
            mk.visible = False
            return
        x0 = d.row_x[idx]
        x1 = x0 + d.row_site_width[idx] * d.row_num_sites[idx]
        y0 = d.row_y[idx]
        with mk.hold_sync():
            mk.x = np.stack([x0, x1], axis=1)
            mk.y = np.stack([y0, y0], axis=1)
            mk.visible = True

    def _draw_labels(self):
        """Names of the macros in view that fit inside them, never two overlapping
        (:func:`floorwidget.style.place_labels`: 10 px text, up to four lines, in the part of
        the macro above its centre handle); the others show their full name on the handle's
        hover and in the details."""
        mk = self.marks.get("labels")
        if mk is None:
            return
        idx = self.macro_idx
        xs, ys = self.x_scale, self.y_scale
        if idx.size == 0 or xs.min is None:
            mk.visible = False
            return
        r = self.fp.rects()[idx]
        inview = np.flatnonzero((r[:, 2] > xs.min) & (r[:, 0] < xs.max) & (r[:, 3] > ys.min)
                                & (r[:, 1] < ys.max))
        ppu = self.px_per_um
        keep, lines, _, ext = place_labels(list(self.labels[inview]), r[inview] * ppu,
                                           _LABEL_PX_PER_CHAR, _LABEL_LINE_PX, max_lines=4,
                                           keep_out=_HANDLE_PX)
        sel = np.flatnonzero(keep)[:_MAX_LABELS]
        if sel.size == 0:
            mk.visible = False
            return
        # one text per line, from the top of the label's box down (y up)
        k = np.array([len(lines[i]) for i in sel])
        row = np.concatenate([np.arange(n) for n in k])
        top = np.repeat(ext[sel, 3], k) / ppu
        with mk.hold_sync():
            mk.x = np.repeat((ext[sel, 0] + ext[sel, 2]) / 2, k) / ppu
            mk.y = top - (row + 0.5) * _LABEL_LINE_PX / ppu
            mk.text = [t for i in sel for t in lines[i]]
            mk.visible = True
