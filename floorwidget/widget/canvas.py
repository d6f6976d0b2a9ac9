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
from ..design import MACRO, STATUS_NAMES, TERMINAL, Design, Floorplan
from ..metrics import illegal_blocks
from ..style import short_labels
from . import geometry as geo
from ._style import status_style, ui_colors
from .canvas_constraints import CanvasConstraints
from .canvas_heat import CanvasHeat
from .canvas_layers import CanvasLayers, set_list
from .canvas_links import BUNDLE_LIMIT, FOUND_LIMIT, CanvasLinks
from .canvas_view import CanvasView

__all__ = ["Canvas", "thumbnail", "FOUND_LIMIT", "BUNDLE_LIMIT"]

_HEAT_BINS = 64          # bins along the longer core side for the heat images


class Canvas(CanvasLayers, CanvasView, CanvasConstraints, CanvasHeat, CanvasLinks):
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

    The drawing code is split by job into the parts it is composed of: the marks
    (:mod:`.canvas_layers`), the view and zoom-dependent layers (:mod:`.canvas_view`),
    blockages, power and regions (:mod:`.canvas_constraints`), heat images and group colours
    (:mod:`.canvas_heat`), selection and flylines (:mod:`.canvas_links`); this class keeps the
    floorplan's own layers (macros, outlines, halos, notches, shape marks), the drag preview
    and the element counts.

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
                        set_list(mk, "fill_colors", [self.group_colours[g] for g in gi])
                        set_list(mk, "fill_opacities", [0.85] * len(idx))
                    else:
                        set_list(mk, "fill_colors", [st[k]["fill"] for k in keys])
                        set_list(mk, "fill_opacities", [float(st[k]["opacity"]) for k in keys])
                    set_list(mk, "colors", [st[k]["stroke"] for k in keys])
                for k, key in enumerate(self.outline_keys):
                    rowsel = np.array([(st[s]["dash"], float(st[s]["width"])) == key
                                       and st[s].get("outline", True) for s in keys], bool)
                    om = m[f"outline{k}"]
                    if rowsel.any():
                        with om.hold_sync():
                            om.x, om.y = x[rowsel], y[rowsel]
                            set_list(om, "colors", [st[s]["stroke"] for s in keys[rowsel]])
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
                    set_list(m["notches"], "fill_colors", [self.ui["outline"]] * len(idx))
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
                set_list(m["channels"], "fill_colors", [self.ui["channel"]] * len(x))
                set_list(m["channels"], "fill_opacities",
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
                set_list(mk, "fill_colors", [self.ui["wall"]] * len(x))
                set_list(mk, "fill_opacities", [float(self.ui["wall_opacity"])] * len(x))

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
