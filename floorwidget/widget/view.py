"""The View tab: find blocks by name, colour by hierarchy group, flylines through logic, the
heat layers, and the legend of the marks (view only: nothing here changes the Session)."""

from __future__ import annotations

import html

import ipywidgets as W
import numpy as np

from .. import hierarchy as hier
from ..design import MACRO
from ._style import status_style, ui_colors
from .context import Context

__all__ = ["ViewPanel", "legend_html"]


class ViewPanel:
    """Find, hierarchy groups, heat layers and the legend."""

    def __init__(self, ctx: Context):
        self.ctx = ctx
        small = {"description_width": "initial"}
        self.find_text = W.Text(placeholder="block name or part of one",
                                layout=W.Layout(width="210px"))
        self.find_text.add_class("fw-find")
        find = ctx.button("Find", lambda: self.find(self.find_text.value),
                          "Centre the view on the block(s) whose name contains this")
        self.group_depth = W.BoundedIntText(value=1, min=0, max=64, description="depth",
                                            style=small, layout=W.Layout(width="90px"),
                                            tooltip="Hierarchy levels kept in a group's name")
        self.group_seps = W.Dropdown(
            options=[("split at / and .", "/."), ("also at _ (flattened names)", "/._")],
            value="/.", layout=W.Layout(width="200px"),
            tooltip="Hierarchy separators in the instance names")
        colour = ctx.toggle("Colour by group", False,
                            "Macros and the logic area coloured by hierarchy group")
        through = ctx.toggle("Through one cell", False,
                             "Also draw the bundles reached through one standard cell or "
                             "cluster")
        self.group_pick = W.Dropdown(layout=W.Layout(width="210px"),
                                     tooltip="Hierarchy groups, largest first")
        show = ctx.button("Show group", lambda: self.show_group(self.group_pick.value),
                          "Select the group's macros and draw its flylines")
        self.group_legend = W.HTML("")
        self._quiet = False
        for wdg in (self.group_depth, self.group_seps):
            wdg.observe(lambda _c: None if self._quiet else ctx.ui(self._regroup), "value")
        colour.observe(lambda ch: None if self._quiet else ctx.ui(
            lambda: self.colour_by_groups(ch["new"])), "value")
        through.observe(lambda ch: ctx.ui(lambda: self._through(ch["new"])), "value")
        heat = [ctx.toggle("Density", False, "Bin utilisation heat layer"),
                ctx.toggle("Congestion", False,
                           "routing demand over supply heat layer (1.0 = full)")]
        for t, name in zip(heat, ("density", "congestion")):
            t.observe(lambda ch, name=name: self._heat_toggled(name, ch), "value")
        power = ctx.toggle("Power grid", False, "Rings and straps of the power grid (VDD, VSS)")
        power.observe(lambda ch: ctx.ui(lambda: ctx.canvas.show_power(ch["new"])), "value")
        self.legend = W.HTML(legend_html())
        self.box = W.VBox([
            W.HBox([self.find_text, find]),
            W.HBox(heat), W.HBox([power]),
            W.HTML("<b>Hierarchy</b>"),
            W.HBox([self.group_depth, self.group_seps]),
            W.HBox([colour, through]),
            W.HBox([self.group_pick, show]), self.group_legend,
            W.HTML("<b>Legend</b>"), self.legend])
        self._refresh_groups()

    def _heat_toggled(self, name: str, change) -> None:
        c, t = self.ctx.canvas, self.ctx.toggles
        if change["new"]:
            t["Congestion" if name == "density" else "Density"].value = False
            c.show_heat(name)
        elif c.heat == name:
            c.show_heat(None)

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
        d, c = self.ctx.design, self.ctx.canvas
        try:
            found, exact = hier.find_blocks(d.names, query)
        except ValueError as e:  # an empty query: also takes the rings away
            c.mark_found([])
            self.ctx.notify(str(e), error=True)
            return []
        found = np.concatenate([found[d.kind[found] == MACRO], found[d.kind[found] != MACRO]])
        msg = hier.found_message(d.names, query, found, exact)
        if found.size == 0:
            c.mark_found([])
            self.ctx.notify(msg, error=True)
            return []
        r = self.ctx.session.floorplan.rects()[found]
        macros = found[d.kind[found] == MACRO]
        self.ctx.select(macros)  # none among them: the selection is cleared
        c.mark_found(found)
        c.show_box(r[:, 0].min(), r[:, 1].min(), r[:, 2].max(), r[:, 3].max())
        if macros.size and found.size > 1:
            msg += f" {macros.size:,d} of them macros, now selected."
        if found.size > len(c.found):
            msg += f" Rings on the first {len(c.found)}."
        self.ctx.notify(msg)
        return [d.names[i] for i in found]

    def _regroup(self) -> None:
        self.ctx.canvas.set_groups(int(self.group_depth.value), self.group_seps.value)
        self._refresh_groups(regrouped=True)

    def _through(self, on: bool) -> None:
        self.ctx.canvas.show_through(on)
        self.ctx.selection_changed()

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
            self.ctx.toggles["Colour by group"].value = bool(on)
        finally:
            self._quiet = False
        regroup = depth is not None or separators is not None
        c = self.ctx.canvas
        if regroup:
            c.set_groups(int(self.group_depth.value), self.group_seps.value, redraw=False)
        c.colour_by_groups(on)
        self._refresh_groups(regrouped=regroup)

    def show_group(self, group) -> None:
        """Make a hierarchy group (its index or key) the flyline source and select its macros."""
        c = self.ctx.canvas
        g = c.groups
        if isinstance(group, str):
            key = "" if group == hier.TOP else group
            if key not in g.keys:
                raise KeyError(f"no hierarchy group {group!r} at depth "
                               f"{self.group_depth.value}")
            group = g.keys.index(key)
        c.focus(group)
        self.ctx.selection_changed()

    @property
    def picked_group(self) -> tuple[str, int, str] | None:
        """The group picked in the list: ``(key, depth, separators)``, or None."""
        if self.group_pick.value is None:
            return None
        key = self.ctx.canvas.groups.keys[int(self.group_pick.value)]
        return key, int(self.group_depth.value), self.group_seps.value

    def _refresh_groups(self, regrouped: bool = False) -> None:
        """The group list (largest 100) and the colour legend of the hierarchy groups."""
        c = self.ctx.canvas
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
        c = self.ctx.canvas
        g = c.groups
        sizes = g.sizes
        mac = np.bincount(g.index, weights=(self.ctx.design.kind == MACRO),
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
        return ('<div style="font-size:11px;line-height:15px;max-width:290px">'
                f"<i>{len(g):,d} hierarchy group(s) at depth {self.group_depth.value}; "
                "largest area first (Okabe–Ito colours). Outlines still show status; the "
                "logic area takes the colour of the group with most cell area in each bin, "
                "stronger where fuller.</i>" + "".join(rows) + "</div>")


def legend_html() -> str:
    """What the marks mean: status fills and outlines, halos, blockages, pins, channels,
    bars, flylines, rings, the selection (HTML)."""
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
        *[(swatch(f'<rect x="2" y="6" width="22" height="4" fill="{c}" '
                  f'fill-opacity="{ui["power_opacity"]}"/>'), lab)
          for c, lab in zip(ui["power"], ui["power_labels"])],
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
    items = "".join(f'<span style="margin-right:8px;display:inline-block">{sv} {html.escape(t)}'
                    f"</span>" for sv, t in parts)
    return (f'<div style="font-size:12px;line-height:20px">{items}'
            "<br/>Shaded background: soft clusters and cells per bin.</div>")
