"""The floorplanning widget: the canvas, its controls, the readouts and the alternatives view.

The widget holds no placement logic.  Mouse events become :class:`~floorwidget.session.Session`
calls (a drop is :meth:`FloorplanWidget.drop`, the one method the drag-end callback calls), and
Session changes, reported through :meth:`Session.on_change`, become marks.  The figures shown are
early-floorplanning estimates; sign-off belongs to the full implementation flow.
"""

from __future__ import annotations

import html
import threading
import time
from collections.abc import Callable
from typing import Any

import ipywidgets as W
import numpy as np

from .. import hierarchy as hier
from ..design import FIXED, MACRO, ORIENTATIONS, STATUS_NAMES, Design, DesignError, Floorplan
from ..kernels import fmt
from ..session import ChangeEvent, Session
from ._style import status_style, ui_colors
from .canvas import Canvas, thumbnail

__all__ = ["FloorplanWidget", "CAUTION"]

CAUTION = ("Early-floorplanning estimates for comparing choices; sign-off belongs to the full "
           "implementation flow's timing, power and physical checks.")

_BUSY = "A placement run is still going; this request was refused (wait for it to finish)."


def _block_names(design: Design, blocks, what: str) -> list[str]:
    """Names of ``blocks`` (a name, a block index, or a list of them), checked with messages
    of ours: an unknown name, an index out of range or anything else is refused before any
    change."""
    items = [blocks] if isinstance(blocks, (str, int, np.integer)) else blocks
    try:
        items = list(np.atleast_1d(np.asarray(items, dtype=object)))
    except (TypeError, ValueError):
        raise TypeError(f"{what}: expected a block name, a block index or a list of them, "
                        f"got {blocks!r}") from None
    n = design.num_blocks
    out = []
    for b in items:
        if isinstance(b, str):
            out.append(design.names[design.block(b)])  # KeyError naming it when unknown
        elif isinstance(b, (int, np.integer)) and not isinstance(b, (bool, np.bool_)):
            if not 0 <= int(b) < n:
                raise IndexError(f"{what}: block index {int(b)} is not in 0..{n - 1}")
            out.append(design.names[int(b)])
        else:
            raise TypeError(f"{what}: expected a block name or index, got {b!r}")
    return out


def _figure(key: str, v: Any) -> str:
    return fmt.percent(v) if key == "largest_logic_region" else fmt.value(v)


class FloorplanWidget(W.VBox):
    """An editable, to-scale floorplan in the notebook.

    Parameters
    ----------
    design : Design
    floorplan : Floorplan, optional
        Starting floorplan (default ``design.initial``); ignored when ``session`` is given.
    session : Session, optional
        Drive an existing session instead of a new one.
    size : int
        Canvas width and height, pixels.
    live : bool
        Rerun :meth:`Session.refine` after every drop ("Live refine").
    pin_on_drop : bool
        Pin a macro when it is dropped ("Pin on drop").

    Attributes
    ----------
    session : Session
    canvas : Canvas
    message : ipywidgets.HTML
        The last notice (a refused request, an error from the session).

    Examples
    --------
    >>> import floorwidget as fw
    >>> d = fw.load("demo_data/heron_dsp.json")         # doctest: +SKIP
    >>> w = fw.FloorplanWidget(d); w                       # doctest: +SKIP
    >>> w.move(d.macros[0], 100.0, 100.0); w.refine()     # doctest: +SKIP
    """

    def __init__(self, design: Design, floorplan: Floorplan | None = None, *,
                 session: Session | None = None, size: int = 640, live: bool = True,
                 pin_on_drop: bool = True, target_density: float = 0.8):
        self.session = session if session is not None else Session(
            design, floorplan, target_density=target_density)
        design = self.session.design
        self.canvas = Canvas(design, self.session.floorplan, size=size, interactive=True)
        self.macro_idx = self.canvas.macro_idx
        self._busy = threading.Lock()
        self._thread: threading.Thread | None = None
        self._drag: dict | None = None
        self._prev_hpwl: float | None = None
        self._last_report: dict = self.session.report
        self.last_solve_s: float | None = None
        self.last_drag_delta: float | None = None
        self.refine_options: dict = {}
        self.place_options: dict = {}

        h = self.canvas.marks["handles"]
        h.on_drag_start(lambda _m, ev: self.drag_start(ev["index"]))
        h.on_drag(lambda _m, ev: self.drag_preview(ev["index"], ev["point"]["x"],
                                                   ev["point"]["y"]))
        h.on_drag_end(lambda _m, ev: self.drop(ev["index"], ev["point"]["x"], ev["point"]["y"]))
        h.on_element_click(lambda _m, ev: self.select([int(self.macro_idx[ev["index"]])]))
        h.observe(self._on_brush, names=["selected"])
        bh = self.canvas.marks["blockage_handles"]
        bh.on_drag_end(lambda _m, ev: self._ui(lambda: self.drop_blockage(
            ev["index"], ev["point"]["x"], ev["point"]["y"])))
        bh.on_element_click(lambda _m, ev: self._ui(lambda: self.select_blockage(ev["index"])))

        self._build_controls(live, pin_on_drop)
        self._build_edit_controls()
        self._build_constraint_controls()
        self._build_view_controls()
        self._build_region_controls()
        self.session.on_change(self._on_change)
        self._refresh_readouts()
        self._refresh_alternatives()
        self._refresh_edit()
        side = W.VBox([self.controls, self.progress, self.message, self.readout, self.legend,
                       self.view_box, self.details, self.edit_box, self.arrange_box,
                       self.constraint_box, self.region_box],
                      layout=W.Layout(width="360px", margin="0 0 0 10px"))
        top = W.HBox([self.canvas.figure, side], layout=W.Layout(flex_flow="row wrap"))
        super().__init__([top, self.alt_box])

    @property
    def design(self) -> Design:
        """The design with the constraints in force (:attr:`Session.design`)."""
        return self.session.design

    # --- controls -------------------------------------------------------------------------------
    def _button(self, label: str, fn: Callable, tip: str = "", width: str = "112px"):
        b = W.Button(description=label, tooltip=tip or label, layout=W.Layout(width=width))
        b.on_click(lambda _b: self._ui(fn))
        self.buttons[label] = b
        return b

    def _build_controls(self, live: bool, pin_on_drop: bool) -> None:
        self.buttons: dict[str, W.Button] = {}
        # how "Place all" arranges the macros (the placer's macro_layout option)
        self.layout_style = W.Dropdown(
            options=[("layout: auto", "auto"), ("layout: periphery", "periphery"),
                     ("layout: free", "free")], value="auto",
            tooltip="Macro arrangement for Place all: against the core boundary and each "
                    "other (periphery), where the wirelength puts them (free), or chosen "
                    "per design (auto)", layout=W.Layout(width="112px"))
        rows = [
            [self._button("Place all", lambda: self.place(wait=False),
                          "Global placement of every movable block (runs in the background)"),
             self.layout_style,
             self._button("Refine", self.refine, "Improve around the pinned macros"),
             self._button("Legalise", self.legalize, "Remove macro overlaps, snap to grid")],
            [self._button("Pin", lambda: self._on_selection("pin"), "Pin the selected macros"),
             self._button("Unpin", lambda: self._on_selection("unpin"), "Make them movable"),
             self._button("Rotate 90°", lambda: self._on_selection("rotate"),
                          "Quarter turn counter-clockwise")],
            [self._button("Flip", lambda: self._on_selection("flip"), "Mirror about the y axis"),
             self._button("Undo", self.undo), self._button("Redo", self.redo)],
        ]
        if self.session.clustered:  # a large design shown as clusters: the cells on request
            rows[-1].append(self._button(
                "Expand cells", lambda: self.expand(wait=False),
                "Place every standard cell of the full design around these macros (runs in "
                "the background; the canvas keeps showing the clusters)"))
        self.toggles: dict[str, W.ToggleButton] = {}

        def toggle(label, value, tip):
            t = W.ToggleButton(value=value, description=label, tooltip=tip,
                               layout=W.Layout(width="112px"))
            self.toggles[label] = t
            return t

        heat = [toggle("Density", False, "Bin utilisation heat layer"),
                toggle("Congestion", False, "RUDY routing-demand heat layer"),
                self._button("Whole die", self.canvas.reset_view, "Zoom out to the die")]
        opts = [toggle("Live refine", live, "Refine after every drop"),
                toggle("Pin on drop", pin_on_drop, "Pin a macro where it is dropped"),
                self._button("Zoom in", lambda: self.canvas.zoom(0.5), "Halve the view")]
        # what a mouse drag on the canvas does: bqplot's interaction layer lies over the marks,
        # so moving macros and panning cannot share one mode
        self.mode = W.ToggleButtons(options=["Move macros", "Pan / zoom", "Box select",
                                             "Draw blockage", "Draw region"],
                                    value="Move macros", style={"button_width": "116px"},
                                    tooltips=["Drag a macro's (or a blockage's) handle to "
                                              "move it",
                                              "Drag to pan, wheel to zoom",
                                              "Drag a box to select several macros",
                                              "Drag a rectangle to add a placement blockage",
                                              "Drag a rectangle to add a cell region (name "
                                              "and kind in the panel)"])
        self.mode.observe(self._mode_changed, "value")
        self.toggles["Density"].observe(lambda ch: self._heat_toggled("density", ch), "value")
        self.toggles["Congestion"].observe(lambda ch: self._heat_toggled("congestion", ch),
                                           "value")
        self.controls = W.VBox([self.mode]
                               + [W.HBox(r, layout=W.Layout(flex_flow="row wrap")) for r in rows]
                               + [W.HBox(heat), W.HBox(opts)])
        self.progress = W.FloatProgress(value=0.0, min=0.0, max=1.0, description="",
                                        layout=W.Layout(width="340px", visibility="hidden"))
        self.message = W.HTML("")
        self.readout = W.HTML("")
        self.details = W.HTML("<i>Click a macro to see its nets and details.</i>")
        self.legend = W.HTML(self._legend_html())
        import bqplot as bq

        self.brush = bq.interacts.BrushSelector(
            x_scale=self.canvas.x_scale, y_scale=self.canvas.y_scale,
            marks=[self.canvas.marks["handles"]], color=ui_colors()["selection"])
        # alternatives
        self.alt_label = W.Text(placeholder="label", layout=W.Layout(width="160px"))
        keep = W.Button(description="Keep as", tooltip="Keep the current floorplan")
        keep.on_click(lambda _b: self._ui(lambda: self.keep(self.alt_label.value)))
        self.buttons["Keep as"] = keep
        self.alt_a = W.Dropdown(description="A", layout=W.Layout(width="220px"))
        self.alt_b = W.Dropdown(description="B", layout=W.Layout(width="220px"))
        restore = W.Button(description="Restore A", tooltip="Make A the current floorplan")
        restore.on_click(lambda _b: self._ui(lambda: self.session.restore(self.alt_a.value)))
        self.buttons["Restore A"] = restore
        for dd in (self.alt_a, self.alt_b):
            dd.observe(lambda _c: self._refresh_thumbs(), "value")
        self.alt_table = W.HTML("")
        self.alt_thumbs = W.HBox([])
        self.alt_diff = W.HTML("")
        self.alt_box = W.VBox([
            W.HTML("<b>Alternatives</b>"), W.HBox([self.alt_label, keep, self.alt_a,
                                                   self.alt_b, restore]),
            self.alt_table, self.alt_thumbs, self.alt_diff])

    def _build_edit_controls(self) -> None:
        """Exact edits of one macro and arrangements of the selection (all Session calls)."""
        px, py = (float(v) for v in self.design.grid_pitch)
        small = {"description_width": "initial"}

        def num(label, tip, width="104px"):
            return W.FloatText(description=label, tooltip=tip, style=small,
                               layout=W.Layout(width=width))

        self.edit_x = num("x", "Lower-left corner x, µm (snaps to the placement grid)")
        self.edit_y = num("y", "Lower-left corner y, µm (snaps to the placement grid)")
        self.edit_orient = W.Dropdown(options=list(ORIENTATIONS), tooltip="Orientation",
                                      layout=W.Layout(width="64px"))
        for wdg, cls in ((self.edit_x, "fw-edit-x"), (self.edit_y, "fw-edit-y"),
                         (self.edit_orient, "fw-edit-orient")):
            wdg.add_class(cls)  # stable hooks for the browser test
        set_b = self._button("Set", self.apply_edit, "Put the selected macro at x, y in this "
                             "orientation (one undo step)", width="52px")
        steps = [("◀", -px, 0.0, "left"), ("▶", px, 0.0, "right"), ("▲", 0.0, py, "up"),
                 ("▼", 0.0, -py, "down")]
        nudges = [self._button(g, lambda dx=dx, dy=dy: self._shift_selection(dx, dy),
                               f"Nudge the selection {w} by one grid step", width="40px")
                  for g, dx, dy, w in steps]
        self.offset_dx = num("dx", "Offset x, µm", "96px")
        self.offset_dy = num("dy", "Offset y, µm", "96px")
        by = self._button("Move by", lambda: self._shift_selection(self.offset_dx.value,
                                                                   self.offset_dy.value),
                          "Move the selection by dx, dy as one group", width="76px")
        self.edit_box = W.VBox([
            W.HTML("<b>Exact position</b> <span style='font-size:11px'>(µm, lower-left "
                   "corner)</span>"),
            W.HBox([self.edit_x, self.edit_y, self.edit_orient, set_b]),
            W.HBox(nudges + [W.HTML(f"<span style='font-size:11px;margin-left:6px'>one "
                                    f"step = {px:g} × {py:g} µm</span>")]),
            W.HBox([self.offset_dx, self.offset_dy, by])])

        self.align_side = W.Dropdown(
            options=[("left edges", "left"), ("right edges", "right"),
                     ("bottom edges", "bottom"), ("top edges", "top"),
                     ("centres in a column", "x_centre"), ("centres in a row", "y_centre")],
            value="left", layout=W.Layout(width="160px"))
        align = self._button("Align", lambda: self._arrange("align", self.align_side.value),
                             "Line the selected macros up", width="76px")
        even = [self._button("Even gaps ↔", lambda: self._arrange("distribute", "x"),
                             "Equal gaps from left to right; the outer two stay",
                             width="104px"),
                self._button("Even gaps ↕", lambda: self._arrange("distribute", "y"),
                             "Equal gaps from bottom to top; the outer two stay",
                             width="104px")]
        self.array_rows = W.BoundedIntText(value=2, min=1, max=10_000, description="rows",
                                           style=small, layout=W.Layout(width="96px"))
        self.array_cols = W.BoundedIntText(value=2, min=1, max=10_000, description="cols",
                                           style=small, layout=W.Layout(width="96px"))
        self.array_pitch_x = num("pitch x", "Column step, µm; 0: abutted (halos apart)", "110px")
        self.array_pitch_y = num("y", "Row step, µm; 0: abutted (halos apart)", "80px")
        arr = self._button("Array", self._array_selection, "Fill an array, in selection "
                           "order, bottom row first; pitch 0 abuts the cells under the halo "
                           "rule", width="64px")
        mirrors = [self._button("Mirror ↔", lambda: self._arrange("mirror", "x"),
                                "Swap left and right about the group's centre", width="86px"),
                   self._button("Mirror ↕", lambda: self._arrange("mirror", "y"),
                                "Swap top and bottom about the group's centre", width="86px"),
                   self._button("To core edge", lambda: self._arrange("push"),
                                "Move the group to the nearest core edge", width="104px")]
        self.arrange_box = W.VBox([
            W.HTML("<b>Arrange selected</b> <span style='font-size:11px'>(pinned macros "
                   "are refused; unpin first)</span>"),
            W.HBox([self.align_side, align]), W.HBox(even),
            W.HBox([self.array_rows, self.array_cols]),
            W.HBox([self.array_pitch_x, self.array_pitch_y, arr]),
            W.HBox(mirrors)])

    def _build_view_controls(self) -> None:
        """Find by name, hierarchy colours and groups, flylines through logic (view only)."""
        small = {"description_width": "initial"}
        self.find_text = W.Text(placeholder="block name or part of one",
                                layout=W.Layout(width="230px"))
        self.find_text.add_class("fw-find")
        find = self._button("Find", lambda: self.find(self.find_text.value),
                            "Centre the view on the block(s) whose name contains this",
                            width="64px")
        self.group_depth = W.BoundedIntText(value=1, min=0, max=64, description="depth",
                                            style=small, layout=W.Layout(width="90px"),
                                            tooltip="Hierarchy levels kept in a group's name")
        self.group_seps = W.Dropdown(
            options=[("split at / and .", "/."), ("also at _ (flattened names)", "/._")],
            value="/.", layout=W.Layout(width="200px"),
            tooltip="Hierarchy separators in the instance names")
        self.toggles["Colour by group"] = W.ToggleButton(
            value=False, description="Colour by group", layout=W.Layout(width="130px"),
            tooltip="Macros and the logic area coloured by hierarchy group")
        self.toggles["Through one cell"] = W.ToggleButton(
            value=False, description="Through one cell", layout=W.Layout(width="130px"),
            tooltip="Also draw the bundles reached through one standard cell or cluster")
        self.group_pick = W.Dropdown(layout=W.Layout(width="230px"),
                                     tooltip="Hierarchy groups, largest first")
        show = self._button("Show group", lambda: self.show_group(self.group_pick.value),
                            "Select the group's macros and draw its flylines", width="100px")
        self.group_legend = W.HTML("")
        self._quiet = False
        for wdg in (self.group_depth, self.group_seps):
            wdg.observe(lambda _c: None if self._quiet else self._ui(self._regroup), "value")
        self.toggles["Colour by group"].observe(
            lambda ch: None if self._quiet else self._ui(lambda: self.colour_by_groups(ch["new"])),
            "value")
        self.toggles["Through one cell"].observe(
            lambda ch: self._ui(lambda: self._through(ch["new"])), "value")
        self.view_box = W.VBox([
            W.HTML("<b>Find and hierarchy</b>"),
            W.HBox([self.find_text, find]),
            W.HBox([self.group_depth, self.group_seps]),
            W.HBox([self.toggles["Colour by group"], self.toggles["Through one cell"]]),
            W.HBox([self.group_pick, show]), self.group_legend])
        self._refresh_groups()

    # --- seeing the design ----------------------------------------------------------------------
    def find(self, query: str) -> list[str]:
        """Find blocks by name (:func:`floorwidget.hierarchy.find_blocks`) and show them.

        An exact name, or a part that only one name contains, centres the view on that block;
        several matches fit the view to all of them.  Found macros become the selection (so the
        arrange controls act on them; no macro found clears the selection); up to
        :data:`~floorwidget.widget.canvas.FOUND_LIMIT` found blocks are ringed.  The message
        says what was found, also when nothing was.

        Returns
        -------
        list of str
            Names found (empty when none).
        """
        d, c = self.design, self.canvas
        try:
            found, exact = hier.find_blocks(d.names, query)
        except ValueError as e:  # an empty query: also takes the rings away
            c.mark_found([])
            self.notify(str(e), error=True)
            return []
        found = np.concatenate([found[d.kind[found] == MACRO], found[d.kind[found] != MACRO]])
        msg = hier.found_message(d.names, query, found, exact)
        if found.size == 0:
            c.mark_found([])
            self.notify(msg, error=True)
            return []
        r = self.session.floorplan.rects()[found]
        macros = found[d.kind[found] == MACRO]
        self.select(macros)  # none among them: the selection is cleared
        c.mark_found(found)
        c.show_box(r[:, 0].min(), r[:, 1].min(), r[:, 2].max(), r[:, 3].max())
        if macros.size and found.size > 1:
            msg += f" {macros.size:,d} of them macros, now selected."
        if found.size > len(c.found):
            msg += f" Rings on the first {len(c.found)}."
        self.notify(msg)
        return [d.names[i] for i in found]

    def _regroup(self) -> None:
        self.canvas.set_groups(int(self.group_depth.value), self.group_seps.value)
        self._refresh_groups(regrouped=True)

    def _through(self, on: bool) -> None:
        self.canvas.show_through(on)
        self._refresh_details()

    def colour_by_groups(self, on: bool = True, depth: int | None = None,
                         separators: str | None = None) -> None:
        """Colour macros and logic by hierarchy group (``on=False``: back to status colours).

        ``depth`` and ``separators`` regroup first (the panel's fields follow).
        """
        self._quiet = True  # the fields' own observers would redo this once per field
        try:
            if depth is not None:
                self.group_depth.value = int(depth)
            if separators is not None:
                self.group_seps.value = separators
            self.toggles["Colour by group"].value = bool(on)
        finally:
            self._quiet = False
        regroup = depth is not None or separators is not None
        if regroup:
            self.canvas.set_groups(int(self.group_depth.value), self.group_seps.value,
                                   redraw=False)
        self.canvas.colour_by_groups(on)
        self._refresh_groups(regrouped=regroup)

    def show_group(self, group) -> None:
        """Make a hierarchy group (its index or key) the flyline source and select its macros."""
        g = self.canvas.groups
        if isinstance(group, str):
            key = "" if group == hier.TOP else group
            if key not in g.keys:
                raise KeyError(f"no hierarchy group {group!r} at depth "
                               f"{self.group_depth.value}")
            group = g.keys.index(key)
        self.canvas.focus(group)
        self._refresh_details()

    def _refresh_groups(self, regrouped: bool = False) -> None:
        """The group list (largest 100) and the colour legend of the hierarchy groups."""
        c = self.canvas
        g = c.groups
        w = c.group_weights()
        order = np.argsort(-w, kind="stable")[:100]
        sizes = g.sizes
        opts = [(f"{g.label(k)} ({sizes[k]:,d})", int(k)) for k in order]
        keep = None if regrouped else self.group_pick.value
        self.group_pick.options = opts
        self.group_pick.value = keep if keep in order else (opts[0][1] if opts else None)
        self.group_legend.value = self.group_legend_html() if c.colour_groups else ""

    def group_legend_html(self) -> str:
        """What the group colours mean: every group under its colour (HTML)."""
        c = self.canvas
        g = c.groups
        sizes = g.sizes
        mac = np.bincount(g.index, weights=(self.design.kind == MACRO),
                          minlength=len(g)).astype(int)
        rows = []
        for colour, members in c.group_legend:
            sw = (f'<svg width="18" height="12"><rect x="1" y="1" width="16" height="10" '
                  f'fill="{colour}" stroke="black" stroke-width="0.5"/></svg>')
            if len(members) == 1:
                k = members[0]
                text = (f"{html.escape(g.label(k))} — {mac[k]:,d} macros, "
                        f"{sizes[k] - mac[k]:,d} other blocks")
            else:
                text = (f"{len(members):,d} more groups, all grey (the palette has "
                        f"{len(c.group_legend) - 1} colours): "
                        f"{int(mac[members].sum()):,d} macros, "
                        f"{int((sizes[members] - mac[members]).sum()):,d} other blocks")
            rows.append(f'<div style="white-space:nowrap;overflow:hidden;'
                        f'text-overflow:ellipsis">{sw} {text}</div>')
        return ('<div style="font-size:11px;line-height:15px;max-width:350px">'
                f"<i>{len(g):,d} hierarchy group(s) at depth {self.group_depth.value}; "
                "largest area first (Okabe–Ito colours). Outlines still show status; the "
                "logic area takes the colour of the group with most cell area in each bin, "
                "stronger where fuller.</i>" + "".join(rows) + "</div>")

    def _legend_html(self) -> str:
        st = status_style()
        ui = ui_colors()

        def swatch(body: str, w: int = 26) -> str:
            return f'<svg width="{w}" height="16">{body}</svg>'

        def dash(d: str) -> str:
            return "" if d in ("", "none") else f' stroke-dasharray="{d}"'

        parts = []
        for key in ("movable", "pinned", "fixed", "illegal"):
            s = st[key]
            hatch = ""
            if "x" in s.get("hatch", ""):
                hatch = ('<path d="M2,14 L24,2 M2,2 L24,14" stroke="black" stroke-width="1" '
                         'stroke-opacity="0.8"/>')
            elif s.get("hatch"):
                hatch = ('<path d="M2,14 L24,2" stroke="black" stroke-width="1" '
                         'stroke-opacity="0.8"/>')
            parts.append((swatch(
                f'<rect x="2" y="2" width="22" height="12" fill="{s["fill"]}" '
                f'fill-opacity="{s["opacity"]}" stroke="{s["stroke"]}" '
                f'stroke-width="{s["width"]}"{dash(s["dasharray"])}/>{hatch}'), key))
        parts += [
            (swatch(f'<rect x="2" y="2" width="22" height="12" fill="none" '
                    f'stroke="{ui["halo"]}" stroke-dasharray="3,2"/>'), "halo"),
            (swatch(f'<rect x="2" y="2" width="22" height="12" fill="{ui["blockage_fill"]}" '
                    f'fill-opacity="{ui["blockage_opacity"]}" stroke="{ui["blockage"]}"/>'),
             "blockage"),
            (swatch(f'<rect x="4" y="4" width="8" height="8" fill="{ui["terminal"]}"/>', 16),
             "I/O pin"),
            (swatch(f'<polygon points="2,14 10,14 2,6" fill="{ui["outline"]}"/>'),
             "pin-1 corner"),
            (swatch(f'<rect x="2" y="5" width="22" height="6" fill="{ui["channel"]}" '
                    f'fill-opacity="{ui["channel_opacity"]}" stroke="{ui["channel"]}"/>'
                    f'<polyline points="2,11 7,5 12,11 17,5 22,11" fill="none" '
                    f'stroke="{ui["channel"]}"/>'), ui["channel_label"]),
            (swatch(f'<rect x="2" y="2" width="22" height="12" fill="none" '
                    f'stroke="{ui["outline"]}"/><rect x="2" y="2" width="5" height="12" '
                    f'fill="{ui["wall"]}" stroke="{ui["wall_stroke"]}" '
                    f'stroke-dasharray="2,1"/>'), ui["wall_label"]),
            (swatch(f'<line x1="2" y1="8" x2="24" y2="8" stroke="{ui["flyline"]}" '
                    f'stroke-opacity="0.45" stroke-width="4"/>'),
             "nets to a macro, I/O bus or group's logic (width ~ count)"),
            (swatch(f'<rect x="2" y="6" width="22" height="4" fill="none" '
                    f'stroke="{ui["flyline_through"]}" stroke-dasharray="3,2"/>'),
             "through one cell"),
            (swatch('<circle cx="13" cy="8" r="6" fill="none" stroke="black" '
                    'stroke-width="2"/>'), "found by name"),
            (swatch(f'<rect x="3" y="3" width="20" height="10" fill="none" '
                    f'stroke="{ui["selection_under"]}" stroke-width="4"/><rect x="3" y="3" '
                    f'width="20" height="10" fill="none" stroke="{ui["selection"]}" '
                    f'stroke-width="2"/>'), "selected"),
        ]
        items = "".join(f'<span style="margin-right:8px;white-space:nowrap">{sv} {html.escape(t)}'
                        f"</span>" for sv, t in parts)
        return (f'<div style="font-size:12px;line-height:20px">{items}'
                "<br/>Shaded background: soft clusters and cells per bin.</div>")

    def _ui(self, fn: Callable) -> None:
        """Run a button action and show its failure in the panel instead of raising."""
        try:
            fn()
        except (DesignError, KeyError, RuntimeError, ValueError) as e:
            self.notify(str(e).strip("'\""), error=True)

    def notify(self, text: str, error: bool = False) -> None:
        """Show one line in the message area of the panel."""
        colour = "#D55E00" if error else "#333333"
        self.message.value = (f'<div style="color:{colour};font-size:12px">'
                              f"{html.escape(text)}</div>" if text else "")

    def _heat_toggled(self, name: str, change) -> None:
        if change["new"]:
            other = "Congestion" if name == "density" else "Density"
            self.toggles[other].value = False
            self.canvas.show_heat(name)
        elif self.canvas.heat == name:
            self.canvas.show_heat(None)

    def _mode_changed(self, change) -> None:
        self.canvas.figure.interaction = {"Move macros": None, "Pan / zoom": self.canvas.panzoom,
                                          "Box select": self.brush,
                                          "Draw blockage": self.draw_brush,
                                          "Draw region": self.draw_brush}[change["new"]]

    # --- blockages and halos --------------------------------------------------------------------
    def _build_constraint_controls(self) -> None:
        """Placement blockages (drawn in the "Draw blockage" mode, a handle each to select and
        move them) and the halo of the selected macros: Session calls only."""
        import bqplot as bq

        small = {"description_width": "initial"}
        self.draw_brush = bq.interacts.BrushSelector(
            x_scale=self.canvas.x_scale, y_scale=self.canvas.y_scale,
            color=ui_colors()["blockage"])
        self.draw_brush.observe(self._on_draw_brush, names=["brushing"])
        self.new_density = W.BoundedFloatText(
            value=0.0, min=0.0, max=1.0, step=0.05, description="new: max density",
            style=small, layout=W.Layout(width="170px"),
            tooltip="0: a full blockage (no macro, no cell); above 0: a partial one where "
                    "cells fill at most this share of the area")
        self.blockage_pick = W.Dropdown(layout=W.Layout(width="200px"),
                                        tooltip="The selected placement blockage")
        self.blockage_pick.observe(
            lambda ch: None if self._quiet_blockage else self._ui(
                lambda: self.select_blockage(ch["new"])), "value")
        self._quiet_blockage = False
        self.blockage_x = W.FloatText(description="x", style=small,
                                      layout=W.Layout(width="104px"),
                                      tooltip="Lower-left corner x, µm")
        self.blockage_y = W.FloatText(description="y", style=small,
                                      layout=W.Layout(width="104px"),
                                      tooltip="Lower-left corner y, µm")
        self.blockage_density = W.BoundedFloatText(
            value=0.0, min=0.0, max=1.0, step=0.05, description="max density", style=small,
            layout=W.Layout(width="140px"), tooltip="0: full; above 0: partial")
        for wdg, cls in ((self.new_density, "fw-new-density"),
                         (self.blockage_x, "fw-blockage-x"), (self.blockage_y, "fw-blockage-y"),
                         (self.blockage_density, "fw-blockage-density")):
            wdg.add_class(cls)
        put = self._button("Apply", self._apply_blockage, "Move the selected blockage to x, y "
                           "and give it this density (one undo step)", width="64px")
        rm = self._button("Delete blockage", self._remove_selected_blockage,
                          "Remove the selected blockage", width="130px")
        self.halo_fields = [W.FloatText(description=s, style=small,
                                        layout=W.Layout(width="80px"),
                                        tooltip=f"Halo {t} of the placed footprint, µm")
                            for s, t in (("L", "left"), ("B", "bottom"), ("R", "right"),
                                         ("T", "top"))]
        for f, cls in zip(self.halo_fields, ("l", "b", "r", "t")):
            f.add_class(f"fw-halo-{cls}")
        halo = self._button("Set halo", self._apply_halo, "Give the selected macros this "
                            "keep-out on each side (one undo step)", width="80px")
        self.constraint_box = W.VBox([
            W.HTML("<b>Blockages and halos</b> <span style='font-size:11px'>(the placer "
                   "honours them on the next Place all or Refine)</span>"),
            W.HBox([self.new_density,
                    W.HTML("<span style='font-size:11px;margin-left:6px'>mode Draw "
                           "blockage: drag a rectangle</span>")]),
            W.HBox([self.blockage_pick, rm]),
            W.HBox([self.blockage_x, self.blockage_y]),
            W.HBox([self.blockage_density, put]),
            W.HBox(self.halo_fields + [halo])])
        self._refresh_blockages()

    def _on_draw_brush(self, change) -> None:
        """A drag ended in a drawing mode: its rectangle becomes a blockage or a region."""
        if change["new"] or change["old"] is not True:  # act when a drag ends
            return
        b = self.draw_brush
        sx, sy = b.selected_x, b.selected_y
        if sx is None or sy is None or len(sx) != 2 or len(sy) != 2:
            return
        draw = self.draw_region if self.mode.value == "Draw region" else self.draw_blockage
        self._ui(lambda: draw(float(sx[0]), float(sy[0]), float(sx[1]), float(sy[1])))
        b.selected_x, b.selected_y = None, None  # the new blockage is drawn by the canvas

    # --- cell regions -----------------------------------------------------------------------
    def _build_region_controls(self) -> None:
        """Cell regions: drawn in the "Draw region" mode with the name and kind typed here;
        the hierarchy group picked under "Find and hierarchy" is assigned to the chosen region.
        Session calls only."""
        self.region_name = W.Text(placeholder="region name", layout=W.Layout(width="150px"))
        self.region_kind = W.Dropdown(options=[("fence (cells stay inside)", "fence"),
                                               ("guide (cells pulled toward it)", "guide")],
                                      value="fence", layout=W.Layout(width="200px"))
        self.region_pick = W.Dropdown(layout=W.Layout(width="200px"),
                                      tooltip="The region to give cells or remove")
        self.region_name.add_class("fw-region-name")
        assign = self._button("Assign group", self.assign_picked_group,
                              "Make the cells of the hierarchy group picked above members of "
                              "this region (one undo step)", width="110px")
        rm = self._button("Remove region", lambda: self.session.remove_region(
            self._picked_region()), "Delete the region; its cells belong to none",
            width="120px")
        self.region_box = W.VBox([
            W.HTML("<b>Cell regions</b> <span style='font-size:11px'>(mode Draw region: "
                   "drag a rectangle; the placer honours them on the next Place all)</span>"),
            W.HBox([self.region_name, self.region_kind]),
            W.HBox([self.region_pick, assign]), W.HBox([rm])])
        self._refresh_regions()

    def _picked_region(self) -> str:
        if self.region_pick.value is None:
            raise ValueError("Draw a region first (mode Draw region), or pick one.")
        return self.region_pick.value

    def draw_region(self, x0: float, y0: float, x1: float, y1: float) -> str:
        """Add a cell region over the rectangle ``(x0, y0)``–``(x1, y1)`` (clipped to the
        die) named by the panel (default ``region_k``) of the panel's kind."""
        self._refuse_if_busy()
        die, reg = self.design.die, self.design.regions
        name = self.region_name.value.strip() or next(
            f"region_{k}" for k in range(len(reg) + 1) if f"region_{k}" not in reg.names)
        xs = np.clip([x0, x1], die[0], die[2])
        ys = np.clip([y0, y1], die[1], die[3])
        self.session.add_region(name, [xs[0], ys[0], xs[1], ys[1]], self.region_kind.value)
        self.region_pick.value = name
        self.region_name.value = ""
        self.notify(f"Added {self.region_kind.value} {name}; pick a hierarchy group above and "
                    "press Assign group.")
        return name

    def assign_picked_group(self) -> int:
        """:meth:`Session.assign_group` of the hierarchy group picked in the view box."""
        region = self._picked_region()
        g = self.canvas.groups
        if self.group_pick.value is None:
            raise ValueError("Pick a hierarchy group first.")
        self._refuse_if_busy()
        key = g.keys[int(self.group_pick.value)]
        n = self.session.assign_group(region, prefix=key, depth=int(self.group_depth.value),
                                      separators=self.group_seps.value)
        self.notify(f"{n:,d} cells of {g.label(int(self.group_pick.value))} now belong to "
                    f"{region}.")
        return n

    def _refresh_regions(self) -> None:
        names = list(self.design.regions.names)
        keep = self.region_pick.value
        self.region_pick.options = names
        self.region_pick.value = keep if keep in names else (names[-1] if names else None)

    def draw_blockage(self, x0: float, y0: float, x1: float, y1: float) -> int:
        """Add a placement blockage over the rectangle with corners ``(x0, y0)``, ``(x1, y1)``
        (clipped to the die) with the panel's "new: max density"; it becomes the selected
        blockage.  What the mouse does in the "Draw blockage" mode, and what tests call."""
        self._refuse_if_busy()
        die = self.design.die
        xs = np.clip([x0, x1], die[0], die[2])
        ys = np.clip([y0, y1], die[1], die[3])
        k = self.session.add_blockage([xs[0], ys[0], xs[1], ys[1]],
                                      max_density=float(self.new_density.value))
        self.select_blockage(k)
        r = self.design.blockages[k]
        self.notify(f"Added blockage {k}: {r[2] - r[0]:.1f} × {r[3] - r[1]:.1f} µm at "
                    f"({r[0]:.1f}, {r[1]:.1f}).")
        return k

    def select_blockage(self, k) -> None:
        """Select placement blockage ``k`` (``None``: none) for the editor."""
        n = len(self.design.blockages)
        if k is not None and (isinstance(k, bool) or not isinstance(k, (int, np.integer))
                              or not 0 <= int(k) < n):
            raise ValueError(f"blockage {k!r}: no such placement blockage (there are {n})")
        self.canvas.select_blockage(None if k is None else int(k))
        self._refresh_blockages()

    def drop_blockage(self, k: int, x: float, y: float) -> None:
        """A blockage handle dropped at centre ``(x, y)``: :meth:`Session.move_blockage` (a
        click, less than half a pixel, only selects it)."""
        self._refuse_if_busy()
        b = self.design.blockages[int(k)]
        cx, cy = (b[0] + b[2]) / 2, (b[1] + b[3]) / 2
        ppu = self.canvas.px_per_um
        self.select_blockage(int(k))
        if abs(x - cx) * ppu < 0.5 and abs(y - cy) * ppu < 0.5:
            return
        try:
            self.session.move_blockage(int(k), b[0] + x - cx, b[1] + y - cy)
        finally:
            self.canvas._draw_blockages()  # put the handle back when the move is refused

    def _apply_blockage(self) -> None:
        k = self.canvas.blockage_selected
        if k is None:
            raise ValueError("Select a blockage first (click its square handle, or pick it "
                             "from the list).")
        self._refuse_if_busy()
        s = self.session
        b, md = s.design.blockages[k], float(s.design.blockage_max_density[k])
        x, y, dens = (float(w.value) for w in (self.blockage_x, self.blockage_y,
                                               self.blockage_density))
        with s.batch(f"edit blockage {k}"):
            if (x, y) != (float(b[0]), float(b[1])):
                s.move_blockage(k, x, y)
            if dens != md:
                s.set_blockage_density(k, dens)

    def _remove_selected_blockage(self) -> None:
        k = self.canvas.blockage_selected
        if k is None:
            raise ValueError("Select a blockage first.")
        self._refuse_if_busy()
        self.canvas.blockage_selected = None
        self.session.remove_blockage(k)

    def _apply_halo(self) -> None:
        names = self._selected_names()
        self._refuse_if_busy()
        self.session.set_halo(names, [float(f.value) for f in self.halo_fields])
        self.notify(f"Halo set on {names[0] if len(names) == 1 else f'{len(names)} macros'}.")

    def _refresh_blockages(self) -> None:
        """The blockage list and editor from the session's design and the canvas selection."""
        d, k = self.design, self.canvas.blockage_selected
        bl, md = d.blockages, d.blockage_max_density
        opts = [(f"{j}: {'full' if md[j] <= 0 else f'≤ {md[j]:.0%}'} "
                 f"{bl[j, 2] - bl[j, 0]:.0f}×{bl[j, 3] - bl[j, 1]:.0f} µm", j)
                for j in range(len(bl))]
        self._quiet_blockage = True
        try:
            self.blockage_pick.options = [("(no blockage selected)", None)] + opts
            self.blockage_pick.value = k
        finally:
            self._quiet_blockage = False
        for w in (self.blockage_x, self.blockage_y, self.blockage_density,
                  self.buttons["Apply"], self.buttons["Delete blockage"]):
            w.disabled = k is None
        if k is not None:
            self.blockage_x.value, self.blockage_y.value = float(bl[k, 0]), float(bl[k, 1])
            self.blockage_density.value = float(md[k])

    # --- selection --------------------------------------------------------------------------------
    @property
    def selection(self) -> list[str]:
        """Names of the selected macros."""
        return [self.design.names[i] for i in self.canvas.selected]

    def select(self, blocks) -> None:
        """Select blocks (indices or names): highlight them, draw their flylines, show details."""
        d = self.design
        idx = [d.block(nm) for nm in _block_names(d, blocks, "select")]
        self.canvas.select(idx)
        self._refresh_details()

    def _on_brush(self, change) -> None:
        sel = change["new"]
        if sel is None:
            return
        self.select(self.macro_idx[np.asarray(sel, dtype=np.intp)])

    def _on_selection(self, action: str) -> None:
        names = [n for n in self.selection]
        if not names:
            raise ValueError("Select one or more macros first (click, or Box select).")
        self._refuse_if_busy()
        s = self.session
        if action in ("pin", "unpin"):
            getattr(s, action)(names)
            return
        with s.batch(f"{action} {len(names)} macro(s)" if len(names) > 1 else
                     f"{action} {names[0]}"):
            for nm in names:
                getattr(s, action)(nm)

    # --- exact edits and arrangements of the selection ------------------------------------------
    def _selected_names(self) -> list[str]:
        names = self.selection
        if not names:
            raise ValueError("Select one or more macros first (click, or Box select).")
        return names

    def _refresh_edit(self) -> None:
        """Fill the exact-position fields from the one selected macro (else disable them)."""
        sel = self.canvas.selected
        one = sel.size == 1
        for wdg in (self.edit_x, self.edit_y, self.edit_orient, self.buttons["Set"]):
            wdg.disabled = not one
        # the halo editor shows the first selected macro's halo
        for f, v in zip(self.halo_fields, self.design.halo[sel[0]] if sel.size else np.zeros(4)):
            f.value = float(v)
        self.buttons["Set halo"].disabled = not sel.size
        if one:
            i, fp = int(sel[0]), self.session.floorplan
            cur = ORIENTATIONS[fp.orient[i]]
            allowed = self.design.allowed_orientations(self.design.names[i])
            self.edit_orient.options = allowed if cur in allowed else [cur, *allowed]
            self.edit_x.value, self.edit_y.value = float(fp.x[i]), float(fp.y[i])
            self.edit_orient.value = cur

    def apply_edit(self) -> None:
        """Put the one selected macro at the typed x, y and orientation (one undo step).

        The orientation is set first (its centre kept); the corner moves only when x or y was
        changed, so a new orientation alone turns the macro in place.
        """
        names = self._selected_names()
        if len(names) != 1:
            raise ValueError("Select exactly one macro to type its position.")
        self._refuse_if_busy()
        nm, s = names[0], self.session
        i = self.design.block(nm)
        x0, y0 = float(s.floorplan.x[i]), float(s.floorplan.y[i])
        x, y, o = float(self.edit_x.value), float(self.edit_y.value), self.edit_orient.value
        with s.batch(f"edit {nm}"):
            if o != s.floorplan.orientation(nm):
                s.set_orientation(nm, o)
            if (x, y) != (x0, y0):
                s.move(nm, x, y)
        self._after("Placed", [nm])

    def _shift_selection(self, dx: float, dy: float) -> None:
        names = self._selected_names()
        self.shift(names, dx, dy)

    def _array_selection(self) -> None:
        # 0 (or less) on an axis abuts the cells along it
        px, py = (float(v) if v > 0 else None
                  for v in (self.array_pitch_x.value, self.array_pitch_y.value))
        pitch = None if px is None and py is None else (px, py)
        self._arrange("array", int(self.array_rows.value), int(self.array_cols.value), pitch)

    def _arrange(self, op: str, *args) -> None:
        getattr(self, op)(self._selected_names(), *args)

    def _after(self, verb: str, names, res=None, detail: str = "") -> None:
        """Say what an edit did, what was adjusted and whether the floorplan is still legal."""
        names = [names] if isinstance(names, str) else list(names)
        what = names[0] if len(names) == 1 else f"{len(names)} macros"
        if detail:
            what += f" ({detail})"
        notes = res.notes if res is not None else ()
        parts = [f"{verb} {what}."] + [f"{n[:1].upper()}{n[1:]}." for n in notes]
        rep = self._last_report
        if not rep.get("legal", True):
            parts.append(f"Not legal now: {fmt.value(rep.get('macro_overlaps'))} macro conflict "
                         "pair(s) under the halo rule; see the readouts.")
        self.notify(" ".join(parts))

    def _arranged(self, op: str, verb: str, names, *args):
        self._refuse_if_busy()
        res = getattr(self.session, op)(names, *args)
        detail = ""
        if op == "array":
            detail = ", ".join(f"{k} step {v:g} µm"
                               for k, v in zip(("column", "row"), res.pitch) if v)
        self._after(verb, names, res, detail)
        return res

    def align(self, names, side: str):
        """:meth:`Session.align`, with a message in the panel (as the other arrangements)."""
        return self._arranged("align", "Aligned", names, side)

    def distribute(self, names, axis: str = "x"):
        """:meth:`Session.distribute`."""
        return self._arranged("distribute", "Spaced", names, axis)

    def array(self, names, rows: int, cols: int, pitch=None):
        """:meth:`Session.array`."""
        return self._arranged("array", "Arrayed", names, rows, cols, pitch)

    def mirror(self, names, axis: str = "x"):
        """:meth:`Session.mirror`."""
        return self._arranged("mirror", "Mirrored", names, axis)

    def push(self, names, side: str | None = None):
        """:meth:`Session.push`."""
        return self._arranged("push", "Moved", names, side)

    def shift(self, names, dx: float, dy: float):
        """:meth:`Session.shift`."""
        return self._arranged("shift", "Moved", names, dx, dy)

    def set_orientation(self, name: str, orientation: str):
        """:meth:`Session.set_orientation`."""
        self._refuse_if_busy()
        return self.session.set_orientation(name, orientation)

    def _bundles_text(self) -> str:
        """The heaviest flyline bundles of the current source, as one line (HTML)."""
        c = self.canvas
        parts = []
        for through, what in ((False, "most shared nets with"),
                              (True, "through one cell, most nets to")):
            if through and not c.through_logic:
                continue
            tg, cnt, _, _ = c.bundle_data(through)
            top = ", ".join(f"{html.escape(c.target_label(t))} ({k})"
                            for t, k in zip(tg[:5].tolist(), cnt[:5].tolist()))
            parts.append(f"{what}: {top or '–'}")
        return "<br/>".join(parts)

    def _refresh_details(self) -> None:
        self._refresh_edit()
        d, fp, c = self.design, self.session.floorplan, self.canvas
        sel = c.selected
        if c.focus_group is not None:
            g = c.groups
            k = c.focus_group
            mem = g.members(k)
            nmac = int((d.kind[mem] == MACRO).sum())
            self.details.value = (f"<b>group {html.escape(g.label(k))}</b>: {nmac:,d} macros"
                                  f"{' (selected)' if nmac else ''}, {mem.size - nmac:,d} "
                                  "other blocks<br/>"
                                  + self._bundles_text())
            return
        if sel.size == 0:
            self.details.value = "<i>Click a macro to see its nets and details.</i>"
            return
        if sel.size > 1:
            names = ", ".join(html.escape(d.names[i]) for i in sel[:8])
            more = f" and {sel.size - 8} more" if sel.size > 8 else ""
            self.details.value = (f"<b>{sel.size} macros selected</b>: {names}{more}<br/>"
                                  "Drag one of them to move all together.<br/>"
                                  + self._bundles_text())
            return
        i = int(sel[0])
        w, h = fp.sizes()
        nets = d.nets_of([i])
        self.details.value = (
            f"<b>{html.escape(d.names[i])}</b> &nbsp; {w[i]:g} × {h[i]:g} µm, "
            f"{ORIENTATIONS[fp.orient[i]]}, {STATUS_NAMES[fp.status[i]]}<br/>"
            f"lower-left ({fp.x[i]:.2f}, {fp.y[i]:.2f}) µm; {len(nets)} nets; group "
            f"{html.escape(c.groups.label(int(c.groups.index[i])))}<br/>"
            + self._bundles_text())

    # --- the one drop path ------------------------------------------------------------------------
    def _refuse_if_busy(self) -> None:
        if self._busy.locked():
            self.notify(_BUSY, error=True)
            raise RuntimeError(_BUSY)

    def _group(self, i: int) -> np.ndarray:
        sel = self.canvas.selected
        if sel.size > 1 and i in sel:
            return sel
        return np.array([i], dtype=np.intp)

    def drag_start(self, index: int) -> None:
        """Remember the state a drag starts from (the live HPWL Δ is measured against it)."""
        i = int(self.macro_idx[index])
        grp = self._group(i)
        fp = self.session.floorplan
        nets = self.design.nets_of(grp)
        from ..metrics import nets_hpwl

        self._drag = {"index": int(index), "group": grp, "nets": nets,
                      "base": float(nets_hpwl(self.design, fp, nets).sum()), "fp": fp}

    def drag_preview(self, index: int, x: float, y: float) -> float:
        """During a drag: the HPWL change of the dragged macros' nets if dropped at centre (x, y).

        Only those nets are measured (:func:`floorwidget.metrics.nets_hpwl`), so this stays fast
        on large designs.  The dragged rectangles follow the handle.

        Returns
        -------
        float
            HPWL change, µm, against the state when the drag started.
        """
        from ..metrics import nets_hpwl

        if self._drag is None or self._drag["index"] != int(index) \
                or self._drag["fp"] is not self.session.floorplan:
            self.drag_start(index)
        dr = self._drag
        fp0 = dr["fp"]
        i = int(self.macro_idx[index])
        cx, cy = fp0.centres()
        dx, dy = float(x) - cx[i], float(y) - cy[i]
        grp = dr["group"]
        tmp = fp0.copy()
        tmp.x[grp] += dx
        tmp.y[grp] += dy
        delta = float(nets_hpwl(self.design, tmp, dr["nets"]).sum()) - dr["base"]
        self.last_drag_delta = delta
        self.canvas.preview(tmp, grp)
        self._refresh_readouts(drag_delta=delta)
        return delta

    def drop(self, index: int, x: float, y: float) -> dict:
        """Handle a dropped macro handle: move (snapped), pin, refine — one undoable step.

        This is the method the canvas's drag-end callback calls, and the one tests call.

        Parameters
        ----------
        index : int
            Index of the handle (the macro's position among ``design.macros``).
        x, y : float
            New centre of the handle, µm (data coordinates).

        Returns
        -------
        dict
            ``moved`` (names), ``refined`` (bool), ``seconds`` (kernel time), ``message``.
        """
        t0 = time.perf_counter()
        self._drag = None
        out = {"moved": [], "refined": False, "seconds": 0.0, "message": ""}
        d, s = self.design, self.session
        nh = len(self.macro_idx)
        if isinstance(index, (bool, np.bool_)) or not isinstance(index, (int, np.integer)) \
                or not 0 <= int(index) < nh:  # -1 would silently take the last macro
            raise IndexError(f"drop: handle index {index!r} is not in 0..{nh - 1} "
                             f"(one handle per macro)")
        try:
            x, y = float(x), float(y)
        except (TypeError, ValueError):
            raise TypeError(f"drop: x and y must be numbers, got {x!r}, {y!r}") from None
        if not (np.isfinite(x) and np.isfinite(y)):
            msg = f"Drop refused: position ({x}, {y}) is not finite."
            self.notify(msg, error=True)
            self.canvas.update(s.floorplan)
            out["message"] = msg
            return out
        i = int(self.macro_idx[index])
        fp = s.floorplan
        cx, cy = fp.centres()
        dx, dy = float(x) - cx[i], float(y) - cy[i]
        if self._busy.locked():
            self.notify(_BUSY, error=True)
            self.canvas.update(fp)
            out["message"] = _BUSY
            return out
        # less than half a pixel is a click, not a move
        if abs(dx) * self.canvas.px_per_um < 0.5 and abs(dy) * self.canvas.px_per_um < 0.5:
            self.select([i])
            return out
        grp = self._group(i)
        grp = grp[fp.status[grp] != FIXED]
        if grp.size == 0:
            self.notify(f"{d.names[i]} is fixed by the input and cannot be moved.", error=True)
            self.canvas.update(fp)
            out["message"] = "fixed"
            return out
        names = [d.names[j] for j in grp]
        label = f"drag {names[0]}" if len(names) == 1 else f"drag {len(names)} macros"
        msg = ""
        moved = []
        # the dropped macros become the selection; the change event below draws it once
        self.canvas.selected = np.unique(grp)
        self.canvas.focus_group = None
        try:
            with s.batch(label):
                for j, nm in zip(grp, names):
                    s.move(nm, float(fp.x[j]) + dx, float(fp.y[j]) + dy)
                if self.toggles["Pin on drop"].value:
                    s.pin(names)
                if self.toggles["Live refine"].value:
                    t1 = time.perf_counter()
                    try:
                        s.refine(**self.refine_options)
                        out["refined"] = True
                        self.last_solve_s = time.perf_counter() - t1
                    except DesignError as e:  # PlacementError: keep the move, say why
                        msg = f"Refine skipped: {e}"
            moved = names
        except (DesignError, KeyError) as e:  # the batch was rolled back: nothing moved
            msg = str(e)
            self.canvas.update(s.floorplan)
            self._refresh_details()
        self.notify(msg, error=bool(msg))
        out.update(moved=moved, message=msg, seconds=time.perf_counter() - t0)
        return out

    # --- session → marks ------------------------------------------------------------------------
    def _on_change(self, ev: ChangeEvent) -> None:
        if ev.action in ("snapshot", "add_alternative"):
            self._refresh_alternatives()
            return
        prev = self._last_report
        redesign = ev.floorplan.design is not self.canvas.design
        self.canvas.update(ev.floorplan)
        if redesign:
            self._refresh_blockages()
            self._refresh_regions()
        self._last_report = self.session.report
        self._prev_hpwl = prev.get("hpwl") if prev else None
        self._refresh_readouts()
        self._refresh_details()
        self.alt_table.value = self.alternatives_html()
        if "current" in (self.alt_a.value, self.alt_b.value) or ev.action == "restore":
            self._refresh_thumbs()

    def _refresh_readouts(self, drag_delta: float | None = None) -> None:
        r = self._last_report
        hp = r.get("hpwl")
        delta = None if self._prev_hpwl is None or hp is None else hp - self._prev_hpwl
        info = self.session.floorplan.info
        solve = self.last_solve_s if self.last_solve_s is not None else info.get("seconds")
        rows = [
            ("HPWL", f"{fmt.value(hp, unit=' µm')}"),
            ("Δ HPWL (last change)", "–" if delta is None else f"{delta:+,.1f} µm"),
        ]
        if drag_delta is not None:
            rows.append(("Δ HPWL while dragging", f"{drag_delta:+,.1f} µm (its nets)"))
        rows += [
            ("Density overflow", fmt.value(r.get("density_overflow"))),
            ("Congestion peak / p99", f"{fmt.value(r.get('congestion_peak'))} / "
                                      f"{fmt.value(r.get('congestion_p99'))}"),
            ("Macro overlaps", f"{fmt.value(r.get('macro_overlaps'))} pairs, "
                               f"{fmt.value(r.get('macro_overlap_area'), unit=' µm²')}"),
            ("Out of die / off grid",
             f"{fmt.value(r.get('out_of_die'))} / {fmt.value(r.get('off_grid'))}"),
            ("Legal", fmt.value(r.get("legal"))),
            ("Narrow channels", f"{fmt.value(r.get('narrow_channels'))} pairs"),
            ("Pins to a wall", f"{fmt.value(r.get('macros_facing_wall'))} macros"),
            ("Logic regions", f"{fmt.value(r.get('logic_regions'))}, largest "
                              f"{fmt.percent(r.get('largest_logic_region'))} of the free area"),
            ("Last solve", "–" if solve is None else f"{float(solve):.2f} s"),
        ]
        ses = self.session
        if ses.clustered:  # the figures are those of the clusters: say so, and what stands
            full = ses.full_design
            rows.insert(0, ("Showing", f"{ses.design.num_blocks:,} blocks for "
                                       f"{full.num_blocks:,} (clustered)"))
            rows.append(("Cells placed", "yes (Expand cells)" if ses.expanded is not None
                         else "no — Expand cells"))
        body = "".join(f"<tr><td style='padding-right:10px'>{k}</td>"
                       f"<td style='text-align:right' class='fw-{k.split()[0].lower()}'>{v}</td>"
                       f"</tr>" for k, v in rows)
        self.readout.value = (f"<table style='font-size:12px'>{body}</table>"
                              "<div style='font-size:11px;line-height:1.3;color:#555;"
                              f"max-width:330px'>{CAUTION}</div>")

    # --- alternatives ---------------------------------------------------------------------------
    def keep(self, label: str) -> None:
        """Keep the current floorplan as alternative ``label`` (:meth:`Session.snapshot`)."""
        self.session.snapshot(label)

    def alternatives_html(self) -> str:
        """The table of alternatives and their figures (HTML)."""
        alts = self.session.alternatives
        cols = [("hpwl", "HPWL µm"), ("density_overflow", "overflow"),
                ("congestion_peak", "cong. peak"), ("congestion_p99", "cong. p99"),
                ("macro_overlaps", "overlaps"), ("legal", "legal"),
                ("narrow_channels", "narrow ch."), ("macros_facing_wall", "pins to wall"),
                ("logic_regions", "logic regions"), ("largest_logic_region", "largest")]
        head = "".join(f"<th style='padding:0 8px'>{h}</th>" for _, h in cols)
        rows = []
        cur = self.session.report
        for lab, rep in [("current", cur)] + [(a.label, a.report) for a in alts]:
            cells = "".join(f"<td style='text-align:right;padding:0 8px'>"
                            f"{_figure(k, rep.get(k))}"
                            "</td>" for k, _ in cols)
            rows.append(f"<tr><td>{html.escape(lab)}</td>{cells}</tr>")
        return (f"<table style='font-size:12px'><tr><th>label</th>{head}</tr>"
                + "".join(rows) + "</table>")

    def _refresh_alternatives(self) -> None:
        labels = ["current", "initial"] + [a.label for a in self.session.alternatives]
        for dd, default in ((self.alt_a, "initial"), (self.alt_b, "current")):
            keep = dd.value if dd.value in labels else default
            dd.options = labels
            dd.value = keep
        self.alt_table.value = self.alternatives_html()
        self._refresh_thumbs()

    def _fp_of(self, label: str) -> Floorplan:
        if label == "current":
            return self.session.floorplan
        if label == "initial":
            return self.session.initial
        return self.session.alternative(label).floorplan

    def thumbnails(self, a: str, b: str, size: int = 260):
        """Side-by-side thumbnails of alternatives ``a`` and ``b`` (same canvas code, static)."""
        figs = []
        for lab in (a, b):
            f = thumbnail(self.design, self._fp_of(lab), size)
            f.title = lab
            f.fig_margin = dict(top=24, bottom=2, left=2, right=2)
            figs.append(f)
        return figs

    def _refresh_thumbs(self) -> None:
        a, b = self.alt_a.value, self.alt_b.value
        if a is None or b is None or not self.session.alternatives:
            self.alt_thumbs.children = []
            self.alt_diff.value = ""
            return
        self.alt_thumbs.children = self.thumbnails(a, b)
        cmp = self.session.compare(a, b)
        keys = ("hpwl", "density_overflow", "congestion_peak", "macro_overlaps")
        parts = [f"{k}: {cmp.metrics[k][2]:+.4g}" for k in keys
                 if k in cmp.metrics and cmp.metrics[k][2] is not None]
        self.alt_diff.value = (f"<div style='font-size:12px'>B − A: {'; '.join(parts)}; "
                               f"{len(cmp.moved)} macro(s) moved</div>")

    # --- placer runs ------------------------------------------------------------------------------
    def _progress(self, stage: str, fraction: float, info: dict | None = None) -> None:
        self.progress.value = float(min(max(fraction, 0.0), 1.0))
        self.progress.description = str(stage)[:12]

    def _run(self, action: str, fn: Callable[[], None], wait: bool) -> bool:
        if not self._busy.acquire(blocking=False):
            self.notify(_BUSY, error=True)
            return False
        self.progress.value = 0.0
        self.progress.layout.visibility = "visible"
        self.notify(f"{action} running…")

        def work():
            t0 = time.perf_counter()
            try:
                fn()
                self.last_solve_s = time.perf_counter() - t0
                self.notify(f"{action} done in {self.last_solve_s:.2f} s.")
                self._refresh_readouts()
            except Exception as e:  # noqa: BLE001 - shown in the panel, session unchanged
                self.notify(f"{action} failed: {e}", error=True)
                if wait:
                    raise
            finally:
                self.progress.layout.visibility = "hidden"
                self._busy.release()

        if wait:
            work()
            return True
        self._thread = threading.Thread(target=work, name=f"floorwidget-{action}", daemon=True)
        self._thread.start()
        return True

    def wait(self, timeout: float | None = None) -> bool:
        """Wait for a background run to finish; ``True`` when none is left running."""
        t = self._thread
        if t is not None:
            t.join(timeout)
            return not t.is_alive()
        return True

    @property
    def busy(self) -> bool:
        """Whether a placement run is going."""
        return self._busy.locked()

    # --- proxies to the session (same names as Session) -------------------------------------------
    def place(self, *, wait: bool = True, **options) -> bool:
        """Global placement (:meth:`Session.place`); ``wait=False`` runs it in the background.

        Returns ``False`` (and says so in the panel) when a run is already going: a second
        request is refused, not queued.
        """
        opts = {**self.place_options, **options}
        if self.layout_style.value != "auto":  # "auto" is the placer's default
            opts.setdefault("macro_layout", self.layout_style.value)
        return self._run("Place", lambda: self.session.place(progress=self._progress, **opts),
                         wait)

    def refine(self, *, wait: bool = True, **options) -> bool:
        """Incremental improvement (:meth:`Session.refine`)."""
        opts = {**self.refine_options, **options}
        return self._run("Refine", lambda: self.session.refine(progress=self._progress, **opts),
                         wait)

    def legalize(self, *, wait: bool = True, **options) -> bool:
        """Macro legalisation (:meth:`Session.legalize`)."""
        return self._run("Legalise", lambda: self.session.legalize(**options), wait)

    def expand(self, *, wait: bool = True, **options) -> bool:
        """Every cell of the full design placed around the current macros
        (:meth:`Session.expand`, clustered sessions only), with the progress bar; the result
        is ``session.expanded``.  ``wait=False`` runs it in the background."""
        if not self.session.clustered:
            self.notify("This design is shown cell by cell already; nothing to expand.",
                        error=True)
            return False
        return self._run("Expand", lambda: self.session.expand(progress=self._progress,
                                                                **options), wait)

    def move(self, name: str, x: float, y: float):
        """:meth:`Session.move`."""
        self._refuse_if_busy()
        return self.session.move(name, x, y)

    def pin(self, names) -> None:
        """:meth:`Session.pin` (names or block indices, like :meth:`select`)."""
        names = _block_names(self.design, names, "pin")
        self._refuse_if_busy()
        self.session.pin(names)

    def unpin(self, names) -> None:
        """:meth:`Session.unpin` (names or block indices, like :meth:`select`)."""
        names = _block_names(self.design, names, "unpin")
        self._refuse_if_busy()
        self.session.unpin(names)

    def rotate(self, name: str) -> None:
        """:meth:`Session.rotate`."""
        self._refuse_if_busy()
        self.session.rotate(name)

    def flip(self, name: str) -> None:
        """:meth:`Session.flip`."""
        self._refuse_if_busy()
        self.session.flip(name)

    def undo(self) -> None:
        """:meth:`Session.undo`."""
        self._refuse_if_busy()
        self.session.undo()

    def redo(self) -> None:
        """:meth:`Session.redo`."""
        self._refuse_if_busy()
        self.session.redo()

    @property
    def floorplan(self) -> Floorplan:
        """The session's current floorplan."""
        return self.session.floorplan

    @property
    def report(self) -> dict:
        """The session's current report (early-floorplanning estimates)."""
        return self.session.report

