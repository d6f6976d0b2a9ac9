"""The to-scale bqplot canvas: layers over two shared linear scales, µm square on screen.

One :class:`Canvas` draws one floorplan.  The interactive widget and the small thumbnails of the
alternatives view use this same class (the thumbnail simply turns interaction off), so what the
engineer compares is drawn exactly like what they edit.

Layer order, bottom to top: heat images (soft clusters / cells, density, congestion), the
logic picture by hierarchy group, die and core outlines, placement rows (only when zoomed in),
blockages (full ones filled, partial ones dashed and lighter, the selected one outlined),
the power grid's rings and straps (VDD, VSS; off until :meth:`Canvas.show_power`),
cell regions (fences solid, guides dashed, with their names),
halos, macro fills, status outlines, narrow channels (a filled strip with a zigzag
hatch) and bars on the pin side of macros whose pins face a wall, orientation notches, flylines
(through one cell, then direct), selection, I/O pins, rings around blocks found by name, labels,
blockage handles, drag handles.  Every layer
is a single mark, so the number of marks does not grow with the design; each mark holds at most
a few thousand elements.
"""

from __future__ import annotations

import numpy as np

from .. import hierarchy as hier
from ..design import CELL, CLUSTER, MACRO, STATUS_NAMES, TERMINAL, Design, Floorplan
from ..metrics import illegal_blocks
from ..style import GROUP_PALETTE, OTHER_GROUP, place_labels, short_labels
from . import geometry as geo
from ._style import heat_colors, status_style, ui_colors

__all__ = ["Canvas", "thumbnail"]

#: most blocks ringed after a search by name
FOUND_LIMIT = 200
#: most flyline bundles drawn per kind (direct, through one cell): the heaviest ones
BUNDLE_LIMIT = 100
_HEAT_BINS = 64          # bins along the longer core side for the heat images
_LABEL_PX_PER_CHAR = 6.2  # average width of one label character at 10 px (measured in Chromium)
_LABEL_LINE_PX = 12.0     # a label's line height at 10 px
_HANDLE_PX = 5.0          # labels keep this far above the centre of a macro (its handle)
_MAX_LABELS = 600         # most labels drawn at once


def _set_list(mark, name: str, values: list) -> None:
    """Assign a per-row list trait only when it changes (each element is validated)."""
    if list(getattr(mark, name)) != values:
        setattr(mark, name, values)


def _placeholder():
    # bqplot's Lines needs at least one row; an invisible zero-size row stands in for "none"
    return np.zeros((1, 2)), np.zeros((1, 2))


class Canvas:
    """Marks for one floorplan of ``design`` on an equal-scale bqplot figure (µm square).

    Parameters
    ----------
    design : Design
    floorplan : Floorplan
    size : int
        Figure width and height in pixels; with ``fluid`` the smallest the figure is drawn
        at (labels are fitted for this size until :meth:`set_screen_size` tells the real one).
    fluid : bool
        The figure fills the width it is given (its height set by the caller's layout)
        instead of a fixed square of ``size`` pixels.
    interactive : bool
        Add drag handles, pan/zoom and labels that follow the zoom.  ``False`` gives a static
        thumbnail drawn by the same code.
    heat_bins : int
        Bins along the longer die side for the heat images.

    Attributes
    ----------
    figure : bqplot.Figure
    marks : dict
        Every layer by name (``"macros"``, ``"handles"``, ``"flylines"``, ...).
    x_scale, y_scale : bqplot.LinearScale
    """

    def __init__(self, design: Design, floorplan: Floorplan, *, size: int = 640,
                 interactive: bool = True, heat_bins: int = _HEAT_BINS, fluid: bool = False):
        import bqplot as bq

        self.design = design
        self.fp = floorplan
        self.size = int(size)
        self._plot_px = float(self.size)  # height of the figure on screen, pixels
        self._aspect = 1.0                 # plot area width / height (set_screen_size)
        self.interactive = interactive
        self.margin = 8 if interactive else 2
        self.macro_idx = np.flatnonzero(design.kind == MACRO)
        # display labels: long hierarchical names shortened, all different (full names in the
        # details panel)
        self.labels = np.array(short_labels([design.names[i] for i in self.macro_idx]),
                               dtype=object)
        self.selected: np.ndarray = np.zeros(0, np.intp)
        self._illegal = np.zeros(design.num_blocks, bool)
        self.heat: str | None = None
        #: channel rule (µm) for the narrow-channel strips; None: the floorplan's, else the
        #: default of :func:`floorwidget.metrics.default_channel`
        self.channel: float | None = None
        self.narrow = None                       # metrics.Channels drawn, after update()
        self.walled = np.zeros(0, np.intp)       # macros drawn with a pins-to-wall bar
        self.found = np.zeros(0, np.intp)        # blocks ringed after a search by name
        self._has_soft = bool(((design.kind != MACRO) & (design.kind != TERMINAL)).any())
        self._groups: hier.Groups | None = None   # made on first use (see groups)
        self._buses: hier.Groups | None = None
        self.colour_groups = False
        self.power_on = False  # draw the power grid (show_power)
        self.group_colours: list[str] = []
        self.group_legend: list[tuple[str, list[int]]] = []
        #: a hierarchy group whose blocks are the flyline source (instead of the selection)
        self.focus_group: int | None = None
        #: also draw the bundles reached through one standard cell or soft cluster
        self.through_logic = False
        self._target_of: np.ndarray | None = None
        self._bundle_cache: dict = {}  # flyline bundles per source, for these targets
        self.status_style = status_style()
        self.ui = ui_colors()

        xmin, xmax, ymin, ymax = geo.square_view(design)
        self.home = (xmin, xmax, ymin, ymax)
        self.x_scale = bq.LinearScale(min=xmin, max=xmax, allow_padding=False)
        self.y_scale = bq.LinearScale(min=ymin, max=ymax, allow_padding=False)
        sc = {"x": self.x_scale, "y": self.y_scale}
        self.marks = self._layers(bq, sc, heat_bins)
        if interactive:
            self.marks.update(self._handles(bq, sc))
        m = self.marks
        fig_kw = dict(
            marks=list(m.values()), axes=[], padding_x=0.0, padding_y=0.0,
            min_aspect_ratio=1, max_aspect_ratio=1,
            fig_margin=dict(top=self.margin, bottom=self.margin, left=self.margin,
                            right=self.margin),
            background_style={"fill": "white"},
        )
        self.figure = bq.Figure(**fig_kw)
        lay = self.figure.layout
        if fluid:  # fills its box; the plot area follows it once its size is known
            lay.width, lay.height = "100%", "100%"
            lay.min_width = lay.min_height = f"{self.size}px"
            lay.flex = "1 1 auto"
        else:
            lay.width = lay.height = lay.min_width = f"{self.size}px"
            lay.flex = "0 0 auto"
        if interactive:
            self.panzoom = bq.interacts.PanZoom(scales={"x": [self.x_scale], "y": [self.y_scale]})
            self.x_scale.observe(self._on_view, names=["min", "max"])
        self.update(floorplan)

    def _layers(self, bq, sc: dict, heat_bins: int) -> dict:
        """Every drawing layer but the interactive ones, bottom to top (one mark each)."""
        design, floorplan, interactive = self.design, self.fp, self.interactive
        m: dict = {}

        # heat images: one image each, never a mark per bin (a coarse display grid)
        from .. import metrics

        c = design.core
        self.grid = metrics.bin_grid(design, bin_size=max(c[2] - c[0], c[3] - c[1]) / heat_bins)
        gx, gy = self.grid.x_centres(), self.grid.y_centres()
        for name in ("cells", "density", "congestion"):
            cs = bq.ColorScale(colors=heat_colors(name), min=0.0, max=1.0)
            m[name] = bq.HeatMap(x=gx, y=gy, color=np.zeros((len(gy), len(gx))),
                                 scales={**sc, "color": cs}, visible=(name == "cells"))
        # hierarchy groups of the logic: one picture, a pixel per heat bin (never a mark per
        # cell); filled in by colour_by_groups
        import ipywidgets as W

        m["groups"] = bq.Image(image=W.Image(value=geo.png_rgba(np.zeros((1, 1, 4))),
                                             format="png"),
                               x=[self.grid.xlo, self.grid.xlo + self.grid.nx * self.grid.bw],
                               y=[self.grid.ylo, self.grid.ylo + self.grid.ny * self.grid.bh],
                               scales=sc, pixelated=True, visible=False)
        die_x, die_y = geo.rect_rows(design.die[None, :])
        m["die"] = bq.Lines(x=die_x[0], y=die_y[0], scales=sc, colors=[self.ui["die"]],
                            stroke_width=self.ui["die_width"])
        core_x, core_y = geo.rect_rows(design.core[None, :])
        m["core"] = bq.Lines(x=core_x[0], y=core_y[0], scales=sc, colors=[self.ui["core"]],
                             stroke_width=self.ui["core_width"], line_style=self.ui["core_dash"])
        px, py = _placeholder()
        m["rows"] = bq.Lines(x=px, y=py, scales=sc, colors=[self.ui["rows"]], stroke_width=0.5,
                             opacities=[0.5], visible=False)
        # blockages: full ones filled, partial ones (a density cap) dashed with a lighter fill
        for name, dash in (("blockages", "solid"), ("blockages_partial", "dashed")):
            m[name] = bq.Lines(x=px, y=py, scales=sc, fill="inside",
                               colors=[self.ui["blockage"]], stroke_width=1.0,
                               line_style=dash, visible=False)
        for k in (0, 1):  # the power grid: VDD, VSS (rings and straps; followpins left out)
            m[f"power{k}"] = bq.Lines(x=px, y=py, scales=sc, fill="inside",
                                      colors=[self.ui["power"][k]], stroke_width=0.0,
                                      visible=False)
        for name, dash in (("regions", "solid"), ("regions_guide", "dashed")):
            m[name] = bq.Lines(x=px, y=py, scales=sc, colors=[self.ui["region"]],
                               stroke_width=self.ui["region_width"], line_style=dash,
                               visible=False)
        m["region_labels"] = bq.Label(x=[0.0], y=[0.0], text=[""], scales=sc, default_size=11,
                                      font_unit="px", align="start",
                                      colors=[self.ui["region"]], visible=False)
        m["blockage_selection"] = bq.Lines(x=px, y=py, scales=sc,
                                           colors=[self.ui["selection"]], stroke_width=3.0,
                                           line_style="dashed", visible=False)
        #: index of the selected placement blockage (None: none)
        self.blockage_selected: int | None = None
        self._constraints_of: Design | None = None  # the design whose blockages are drawn
        m["halos"] = bq.Lines(x=px, y=py, scales=sc, colors=[self.ui["halo"]],
                              stroke_width=self.ui["halo_width"], line_style=self.ui["halo_dash"],
                              visible=False)
        m["macros"] = bq.Lines(x=px, y=py, scales=sc, fill="inside", stroke_width=1.0,
                               close_path=True)
        # status outlines: bqplot draws one dash style per mark, so one mark per outline style
        self.outline_keys = sorted({(s["dash"], float(s["width"]))
                                    for s in self.status_style.values()})
        for k, (dash, width) in enumerate(self.outline_keys):
            m[f"outline{k}"] = bq.Lines(x=px, y=py, scales=sc, colors=[self.ui["outline"]],
                                        stroke_width=width, line_style=dash, visible=False)
        # hatching that the status style asks for ("xx" crosses, other patterns a diagonal):
        # a third cue besides colour and outline, for greyscale prints
        m["hatch"] = bq.Lines(x=px, y=py, scales=sc, colors=[self.ui["outline"]],
                              stroke_width=1.2, opacities=[0.8], visible=False)
        # floorplan shape: narrow channels and pins toward a wall (metrics.channel_gaps and
        # metrics.wall_bars); colour, hatch and dash so they read in greyscale too
        m["channels"] = bq.Lines(x=px, y=py, scales=sc, fill="inside", stroke_width=1.0,
                                 colors=[self.ui["channel"]], visible=False)
        m["channel_hatch"] = bq.Lines(x=px, y=py, scales=sc, stroke_width=1.0,
                                      colors=[self.ui["channel"]], visible=False)
        m["wall_bars"] = bq.Lines(x=px, y=py, scales=sc, fill="inside", stroke_width=1.5,
                                  colors=[self.ui["wall_stroke"]],
                                  line_style=self.ui["wall_dash"], visible=False)
        m["notches"] = bq.Lines(x=px, y=py, scales=sc, fill="inside", stroke_width=0.5,
                                colors=[self.ui["outline"]], visible=False)
        # bundles through one cell: hollow and dashed, so they differ from the direct ones
        # by shape (the group colours use the whole palette)
        m["flylines_through"] = bq.Lines(x=px, y=py, scales=sc, stroke_width=1.0,
                                         line_style="dashed", opacities=[0.7],
                                         colors=[self.ui["flyline_through"]], visible=False)
        m["flylines"] = bq.Lines(x=px, y=py, scales=sc, fill="inside", stroke_width=0.0,
                                 colors=[self.ui["flyline"]], visible=False)
        # selection: a light outline over a dark one, visible on any fill and in greyscale
        m["selection_under"] = bq.Lines(x=px, y=py, scales=sc,
                                        colors=[self.ui["selection_under"]], stroke_width=6.0,
                                        visible=False)
        m["selection"] = bq.Lines(x=px, y=py, scales=sc, colors=[self.ui["selection"]],
                                  stroke_width=3.0, visible=False)
        tx, ty = geo.terminal_xy(design, floorplan)
        # an I/O pin can be dragged along the die edge (it snaps to a slot on drop)
        m["terminals"] = bq.Scatter(x=tx, y=ty, scales=sc, marker="square",
                                    default_size=10 if interactive else 4,
                                    colors=[self.ui["terminal"]], stroke=None,
                                    enable_move=interactive, update_on_move=False)
        return m

    def _handles(self, bq, sc: dict) -> dict:
        """Rings for found blocks, labels, and the drag handles of blockages and macros."""
        design, floorplan, m = self.design, self.fp, {}
        # rings around blocks found by name (at most FOUND_LIMIT of them)
        m["found"] = bq.Scatter(x=[0.0], y=[0.0], scales=sc, marker="circle", fill=False,
                                default_size=220, stroke=self.ui["found"], stroke_width=2.5,
                                colors=[self.ui["found"]], visible=False)
        m["labels"] = bq.Label(x=[0.0], y=[0.0], text=[""], scales=sc, default_size=10,
                               font_unit="px", align="middle", y_offset=4,
                               colors=[self.ui["label"]],
                               visible=False)
        # a handle at each blockage's centre: click selects it, a drag moves it
        m["blockage_handles"] = bq.Scatter(
            x=[0.0], y=[0.0], scales=sc, enable_move=True, update_on_move=False,
            marker="square", default_size=48, colors=[self.ui["blockage_fill"]],
            stroke=self.ui["blockage"], stroke_width=1.5, visible=False)
        cx, cy = floorplan.centres()
        m["handles"] = bq.Scatter(
            x=cx[self.macro_idx], y=cy[self.macro_idx], scales=sc, enable_move=True,
            update_on_move=False, marker="circle", default_size=36,
            colors=[self.ui["handle"]], stroke=self.ui["outline"], stroke_width=1.0,
            opacities=[0.9], selected_style={"stroke": self.ui["selection"],
                                                      "stroke-width": 3},
            unselected_style={}, names=[design.names[i] for i in self.macro_idx],
            display_names=False, tooltip=bq.Tooltip(fields=["name"]))
        return m

    # --- view ---------------------------------------------------------------------------------
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

    # --- blockages -------------------------------------------------------------------------------
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
                _set_list(mk, "fill_colors", [self.ui["blockage_fill"]] * len(x))
                _set_list(mk, "fill_opacities", [float(v) for v in op])
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

    # --- the power grid --------------------------------------------------------------------
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
                _set_list(mk, "fill_colors", [self.ui["power"][k]] * len(x))
                _set_list(mk, "fill_opacities", [self.ui["power_opacity"]] * len(x))
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

    def select_blockage(self, k: int | None) -> None:
        """Outline blockage ``k`` (``None``: no blockage selected)."""
        self.blockage_selected = k
        self._draw_blockages()

    # --- state --------------------------------------------------------------------------------
    def update(self, fp: Floorplan, illegal: np.ndarray | None = None) -> None:
        """Redraw every floorplan-dependent layer for ``fp`` (the marks are reused).

        ``fp.design`` may be another object than the canvas's design with the same netlist
        (a Session constraint edit): its blockages and halos are drawn."""
        self.fp = fp
        if fp.design is not self._constraints_of:
            self.design = self._constraints_of = fp.design
            self._draw_blockages()
            self._draw_regions()
        d = self.design
        if self.power_on:  # macro rings and cut straps follow the macros
            self._draw_power()
        if illegal is None:
            illegal = illegal_blocks(d, fp)
        self._illegal = illegal
        idx = self.macro_idx
        rects = fp.rects()
        st = self.status_style
        keys = np.array([STATUS_NAMES[s] for s in fp.status[idx]], dtype=object)
        keys[illegal[idx]] = "illegal"
        m = self.marks
        with self.figure.hold_sync():
            if idx.size:
                x, y = geo.rect_rows(rects[idx])
                mk = m["macros"]
                with mk.hold_sync():
                    mk.x, mk.y = x, y
                    if self.colour_groups:
                        gi = self.groups.index[idx]
                        _set_list(mk, "fill_colors", [self.group_colours[g] for g in gi])
                        _set_list(mk, "fill_opacities", [0.85] * len(idx))
                    else:
                        _set_list(mk, "fill_colors", [st[k]["fill"] for k in keys])
                        _set_list(mk, "fill_opacities", [float(st[k]["opacity"]) for k in keys])
                    _set_list(mk, "colors", [st[k]["stroke"] for k in keys])
                for k, key in enumerate(self.outline_keys):
                    rowsel = np.array([(st[s]["dash"], float(st[s]["width"])) == key
                                       and st[s].get("outline", True) for s in keys], bool)
                    om = m[f"outline{k}"]
                    if rowsel.any():
                        with om.hold_sync():
                            om.x, om.y = x[rowsel], y[rowsel]
                            _set_list(om, "colors", [st[s]["stroke"] for s in keys[rowsel]])
                            om.visible = True
                    else:
                        om.visible = False
                self._draw_hatch(rects[idx], keys)
                hl = d.halo[idx]
                has = (hl > 0).any(axis=1)
                if has.any():
                    hx, hy = geo.rect_rows(fp.rects(halo=True)[idx][has])
                    with m["halos"].hold_sync():
                        m["halos"].x, m["halos"].y = hx, hy
                        m["halos"].visible = True
                else:
                    m["halos"].visible = False
                nx_, ny_ = geo.notch_rows(d, fp, idx)
                with m["notches"].hold_sync():
                    m["notches"].x, m["notches"].y = nx_, ny_
                    _set_list(m["notches"], "fill_colors", [self.ui["outline"]] * len(idx))
                    m["notches"].visible = True
                self._draw_shape()
                if "handles" in m:
                    cx, cy = fp.centres()
                    with m["handles"].hold_sync():
                        m["handles"].x, m["handles"].y = cx[idx], cy[idx]
            self._draw_cells()
            tm = m["terminals"]
            with tm.hold_sync():
                tm.x, tm.y = geo.terminal_xy(d, fp)
            if self.interactive:
                self._draw_labels()
                self._draw_flylines()
                self._draw_selection()
                if self.found.size:
                    self.mark_found(self.found)

    def _draw_shape(self) -> None:
        """Narrow channels and pins-toward-a-wall bars of the current floorplan."""
        from .. import metrics

        fp, m = self.fp, self.marks
        chans = metrics.channel_gaps(self.design, fp,
                                     self.channel if self.channel is not None
                                     else fp.info.get("channel"))
        self.narrow = chans
        for name in ("channels", "channel_hatch"):
            m[name].visible = bool(len(chans))
        if len(chans):
            x, y = geo.rect_rows(chans.strips)
            zx, zy = geo.zigzag_rows(chans.strips, chans.vertical)
            with m["channels"].hold_sync():
                m["channels"].x, m["channels"].y = x, y
                _set_list(m["channels"], "fill_colors", [self.ui["channel"]] * len(x))
                _set_list(m["channels"], "fill_opacities",
                          [float(self.ui["channel_opacity"])] * len(x))
            with m["channel_hatch"].hold_sync():
                m["channel_hatch"].x, m["channel_hatch"].y = zx, zy
        blocks, bars = metrics.wall_bars(self.design, fp)
        self.walled = blocks
        mk = m["wall_bars"]
        mk.visible = bool(len(blocks))
        if len(blocks):
            x, y = geo.rect_rows(bars)
            with mk.hold_sync():
                mk.x, mk.y = x, y
                _set_list(mk, "fill_colors", [self.ui["wall"]] * len(x))
                _set_list(mk, "fill_opacities", [float(self.ui["wall_opacity"])] * len(x))

    def _draw_hatch(self, rects: np.ndarray, keys: np.ndarray) -> None:
        st = self.status_style
        hatch = np.array([st[k].get("hatch", "") for k in keys], dtype=object)
        cross = np.array(["x" in h for h in hatch], bool)
        diag = np.array([bool(h) for h in hatch], bool) & ~cross
        mk = self.marks["hatch"]
        if not (cross.any() or diag.any()):
            mk.visible = False
            return
        r = rects
        # crosses: lower-left -> upper-right -> lower-right -> upper-left (both diagonals);
        # diagonals: lower-left -> upper-right, the end repeated to keep four points a row
        xs = np.concatenate([r[cross][:, [0, 2, 2, 0]], r[diag][:, [0, 2, 2, 2]]])
        ys = np.concatenate([r[cross][:, [1, 3, 1, 3]], r[diag][:, [1, 3, 3, 3]]])
        with mk.hold_sync():
            mk.x, mk.y = xs, ys
            mk.visible = True

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

    # --- hierarchy --------------------------------------------------------------------------
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

    @property
    def buses(self) -> hier.Groups:
        """The I/O terminals grouped into buses (:func:`floorwidget.hierarchy.bus_groups`)."""
        if self._buses is None:
            d = self.design
            self._buses = hier.bus_groups([d.names[i] for i in np.flatnonzero(d.kind == TERMINAL)])
        return self._buses

    def _targets(self) -> np.ndarray:
        """Flyline target of each block: the macro itself, its I/O bus, its group's logic."""
        if self._target_of is None:
            d = self.design
            n = d.num_blocks
            t = np.full(n, -1, np.intp)
            mac = d.kind == MACRO
            t[mac] = np.flatnonzero(mac)
            term = d.kind == TERMINAL
            t[term] = n + self.buses.index
            logic = (d.kind == CELL) | (d.kind == CLUSTER)
            t[logic] = n + len(self.buses) + self.groups.index[logic]
            self._target_of = t
        return self._target_of

    def target_label(self, t: int) -> str:
        """What flyline target ``t`` is: a macro's name, an I/O bus or a group's logic."""
        n = self.design.num_blocks
        if t < n:
            return self.design.names[t]
        if t < n + len(self.buses):
            return f"I/O {self.buses.keys[t - n]}"
        return f"logic of {self.groups.label(t - n - len(self.buses))}"

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

    def preview(self, fp: Floorplan, blocks) -> None:
        """Move the rectangles of ``blocks`` (macro indices) to where ``fp`` has them.

        Used while a drag is under way; only those rows change, the rest of the marks stay.
        """
        blocks = np.asarray(blocks, dtype=np.intp)
        pos = np.searchsorted(self.macro_idx, blocks)
        x, y = geo.rect_rows(fp.rects()[blocks])
        mk = self.marks["macros"]
        mx = np.array(mk.x, dtype=np.float64).reshape(-1, 5)
        my = np.array(mk.y, dtype=np.float64).reshape(-1, 5)
        mx[pos], my[pos] = x, y
        with mk.hold_sync():
            mk.x, mk.y = mx, my
        if self.selected.size:
            sx, sy = geo.rect_rows(fp.rects()[self.selected])
            for sel in (self.marks["selection_under"], self.marks["selection"]):
                with sel.hold_sync():
                    sel.x, sel.y = sx, sy

    # --- selection and flylines ---------------------------------------------------------------
    def select(self, blocks) -> None:
        """Highlight ``blocks`` (indices) and show the flylines of their nets."""
        self.selected = np.unique(np.asarray(blocks, dtype=np.intp))
        unfocus = self.focus_group is not None
        self.focus_group = None
        self._draw_selection()
        self._draw_flylines()
        if unfocus and self.colour_groups:  # the logic picture showed the focus group alone
            self._draw_cells()

    def focus(self, group: int | None) -> None:
        """Make hierarchy group ``group`` the flyline source and select its macros.

        With colours by group on, the logic picture then shows that group's logic alone.
        ``None`` clears it (and the selection).
        """
        if group is None:
            self.select([])
            return
        g = int(group)
        if not 0 <= g < len(self.groups):
            raise IndexError(f"no hierarchy group {group!r} (there are {len(self.groups)})")
        mem = self.groups.members(g)
        self.selected = mem[self.design.kind[mem] == MACRO]
        self.focus_group = g
        self._draw_selection()
        self._draw_flylines()
        if self.colour_groups:
            self._draw_cells()

    def show_through(self, on: bool = True) -> None:
        """Also draw the flyline bundles reached through one standard cell or soft cluster."""
        self.through_logic = bool(on)
        if self.interactive:
            self._draw_flylines()

    def mark_found(self, blocks) -> None:
        """Ring the centres of ``blocks`` (at most :data:`FOUND_LIMIT`; none clears)."""
        mk = self.marks.get("found")
        if mk is None:
            return
        blocks = np.asarray(blocks, dtype=np.intp)[:FOUND_LIMIT]
        self.found = blocks
        if blocks.size == 0:
            mk.visible = False
            return
        cx, cy = self.fp.centres()
        with mk.hold_sync():
            mk.x, mk.y = cx[blocks], cy[blocks]
            mk.visible = True

    def source_blocks(self) -> np.ndarray:
        """The flyline source: the focus group's blocks, else the selection."""
        if self.focus_group is not None:
            return self.groups.members(self.focus_group)
        return self.selected

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

    def _draw_selection(self):
        marks = (self.marks["selection_under"], self.marks["selection"])
        if self.selected.size == 0:
            for mk in marks:
                mk.visible = False
            return
        x, y = geo.rect_rows(self.fp.rects()[self.selected])
        for mk in marks:
            with mk.hold_sync():
                mk.x, mk.y = x, y
                mk.visible = True

    def bundle_data(self, through: bool = False):
        """Flyline bundles of :meth:`source_blocks` (see :func:`geometry.net_bundles`).

        Targets are the other macros (each its own bundle), the I/O buses and the logic of each
        hierarchy group (:meth:`target_label` names them).  ``through=True`` gives the bundles
        reached through one standard cell or soft cluster instead.  Kept per source: the
        bundles depend on the netlist only.
        """
        src = self.source_blocks()
        key = (src.tobytes(), bool(through))
        cache = self._bundle_cache
        if key not in cache:
            if len(cache) > 8:
                cache.clear()
            d = self.design
            mask = ((d.kind == CELL) | (d.kind == CLUSTER)) if through else None
            cache[key] = geo.net_bundles(d, src, self._targets(), through=mask,
                                         limit=BUNDLE_LIMIT)
        return cache[key]

    def _draw_flylines(self):
        src = self.source_blocks()
        cx, cy = self.fp.centres()
        for name, through in (("flylines", False), ("flylines_through", True)):
            mk = self.marks[name]
            if src.size == 0 or (through and not self.through_logic):
                mk.visible = False
                continue
            tg, cnt, pt, pb = self.bundle_data(through)
            if tg.size == 0:
                mk.visible = False
                continue
            # each bundle ends in the middle of the blocks of its target that it reaches
            u, inv = np.unique(pt, return_inverse=True)
            k = np.bincount(inv, minlength=len(u))
            ex = np.bincount(inv, weights=cx[pb], minlength=len(u)) / k
            ey = np.bincount(inv, weights=cy[pb], minlength=len(u)) / k
            at = np.searchsorted(u, tg)
            x0, y0 = float(cx[src].mean()), float(cy[src].mean())
            # width in pixels grows with the number of nets in the bundle, converted to µm
            width_px = 1.0 + 1.5 * np.log2(cnt.astype(np.float64))
            xs, ys = geo.bundle_rows(x0, y0, ex[at], ey[at], width_px / self.px_per_um)
            with mk.hold_sync():
                mk.x, mk.y = xs, ys
                if not through and len(mk.fill_colors) != len(tg):  # lists validate slowly
                    mk.fill_colors = [self.ui["flyline"]] * len(tg)
                    mk.fill_opacities = [0.45] * len(tg)
                mk.visible = True

    def element_counts(self) -> dict[str, int]:
        """Elements drawn by each mark (rows of a 2-D Lines, points of a Scatter, bins)."""
        out = {}
        for k, mk in self.marks.items():
            if not mk.visible:
                out[k] = 0
                continue
            if hasattr(mk, "color") and k in ("cells", "density", "congestion"):
                out[k] = int(np.asarray(mk.color).size)
            elif k == "groups":  # one picture, a pixel per heat bin
                out[k] = self.grid.nx * self.grid.ny
            elif getattr(mk, "text", None) is not None and k == "labels":
                out[k] = len(mk.text)
            else:
                x = np.asarray(mk.x)
                if x.ndim == 2:
                    out[k] = int(x.shape[0])
                else:  # a Scatter's points, or a Lines mark squeezed to one line
                    out[k] = 1 if type(mk).__name__ == "Lines" else int(x.size)
        return out


def thumbnail(design: Design, floorplan: Floorplan, size: int = 240):
    """A small static picture of ``floorplan`` drawn by the same :class:`Canvas` code.

    Returns
    -------
    bqplot.Figure
    """
    return Canvas(design, floorplan, size=size, interactive=False).figure
