"""The canvas's marks: every drawing layer made once, bottom to top, one bqplot mark each
(:class:`CanvasLayers`, a part of :class:`~floorwidget.widget.canvas.Canvas`), and the small
helpers the drawing code shares."""

from __future__ import annotations

import numpy as np

from ..design import Design
from . import geometry as geo
from ._style import heat_colors


def set_list(mark, name: str, values: list) -> None:
    """Assign a per-row list trait only when it changes (each element is validated)."""
    if list(getattr(mark, name)) != values:
        setattr(mark, name, values)


def placeholder():
    """bqplot's Lines needs at least one row; an invisible zero-size row stands in for
    "none"."""
    return np.zeros((1, 2)), np.zeros((1, 2))


class CanvasLayers:
    """Making the layers (one mark each; the number of marks never grows with the design)."""

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
        px, py = placeholder()
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
