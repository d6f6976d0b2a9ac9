"""The details of the selection: one macro's size, orientation, status, corner, nets and group,
or a count for several, with the heaviest flyline bundles; the full names the canvas labels
shorten."""

from __future__ import annotations

import html

import ipywidgets as W

from ..design import MACRO, ORIENTATIONS, STATUS_NAMES
from .context import Context

__all__ = ["DetailsPanel"]

_HINT = "<i>Click a macro to see its nets and details.</i>"


class DetailsPanel:
    """Follows the selection and the Session by itself."""

    def __init__(self, ctx: Context):
        self.ctx = ctx
        self.html = W.HTML(_HINT)
        self.html.add_class("fw-details")
        self.box = self.html
        ctx.on_select(self.refresh)
        ctx.session.on_change(lambda ev: None if ev.action in ("snapshot", "add_alternative")
                              else self.refresh())

    def _bundles_text(self) -> str:
        """The heaviest flyline bundles of the current source, as one line (HTML)."""
        c = self.ctx.canvas
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

    def refresh(self) -> None:
        d, fp, c = self.ctx.design, self.ctx.session.floorplan, self.ctx.canvas
        sel = c.selected
        if c.focus_group is not None:
            g = c.groups
            k = c.focus_group
            mem = g.members(k)
            nmac = int((d.kind[mem] == MACRO).sum())
            self.html.value = (f"<b>group {html.escape(g.label(k))}</b>: {nmac:,d} macros"
                               f"{' (selected)' if nmac else ''}, {mem.size - nmac:,d} "
                               "other blocks<br/>" + self._bundles_text())
            return
        if sel.size == 0:
            self.html.value = _HINT
            return
        if sel.size > 1:
            names = ", ".join(html.escape(d.names[i]) for i in sel[:8])
            more = f" and {sel.size - 8} more" if sel.size > 8 else ""
            self.html.value = (f"<b>{sel.size} macros selected</b>: {names}{more}<br/>"
                               "Drag one of them to move all together.<br/>"
                               + self._bundles_text())
            return
        i = int(sel[0])
        w, h = fp.sizes()
        nets = d.nets_of([i])
        self.html.value = (
            f"<b style='word-break:break-all'>{html.escape(d.names[i])}</b> &nbsp; "
            f"{w[i]:g} × {h[i]:g} µm, {ORIENTATIONS[fp.orient[i]]}, "
            f"{STATUS_NAMES[fp.status[i]]}<br/>"
            f"lower-left ({fp.x[i]:.2f}, {fp.y[i]:.2f}) µm; {len(nets)} nets; group "
            f"{html.escape(c.groups.label(int(c.groups.index[i])))}<br/>"
            + self._bundles_text())
