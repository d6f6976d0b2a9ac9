"""The alternatives along the bottom: keep the current floorplan under a label, a table of
every alternative's figures, two of them side by side as thumbnails (drawn by the canvas code)
with their difference, and restore one."""

from __future__ import annotations

import html

import ipywidgets as W

from ..design import Floorplan
from ..kernels import fmt
from ..session import ChangeEvent
from .canvas import thumbnail
from .context import Context
from .readouts import Readouts

__all__ = ["AlternativesPanel"]

#: The table's columns: report key and heading
COLUMNS = [("hpwl", "HPWL µm"), ("density_overflow", "overflow"),
           ("congestion_peak", "cong. peak"), ("congestion_p99", "cong. p99"),
           ("macro_overlaps", "overlaps"), ("legal", "legal"), ("narrow_channels", "narrow ch."),
           ("macros_facing_wall", "pins to wall"), ("logic_regions", "logic regions"),
           ("largest_logic_region", "largest")]


def _figure(key: str, rep: dict) -> str:
    if key not in rep:  # coming from the background report
        return "…"
    v = rep[key]
    return fmt.percent(v) if key == "largest_logic_region" else fmt.value(v)


class AlternativesPanel:
    """Follows the Session by itself (snapshots, restores, every change of "current").

    The current row takes the figures the readouts show (their report comes in two stages
    after an edit); the row and the thumbnails are redrawn when the whole report is in."""

    def __init__(self, ctx: Context, readouts: Readouts):
        self.ctx, self.readouts = ctx, readouts
        s = ctx.session
        self.label = W.Text(placeholder="label", layout=W.Layout(width="160px"))
        keep = ctx.button("Keep as", lambda: self.keep(self.label.value),
                          "Keep the current floorplan")
        self.a = W.Dropdown(description="A", layout=W.Layout(width="200px"))
        self.b = W.Dropdown(description="B", layout=W.Layout(width="200px"))
        restore = ctx.button("Restore A", lambda: s.restore(self.a.value),
                             "Make A the current floorplan")
        for dd in (self.a, self.b):
            dd.observe(lambda _c: self._refresh_thumbs(), "value")
        self.table = W.HTML("")
        self.thumbs = W.HBox([])
        self.diff = W.HTML("")
        self.box = W.VBox([W.HBox([self.label, keep, self.a, self.b, restore],
                                  layout=W.Layout(flex_flow="row wrap")),
                           W.HBox([self.table, W.VBox([self.thumbs, self.diff])],
                                  layout=W.Layout(flex_flow="row wrap"))])
        self.box.add_class("fw-alternatives")
        s.on_change(self._on_change)
        readouts.completed.append(self._on_complete)
        self.refresh()

    def keep(self, label: str) -> None:
        """Keep the current floorplan as alternative ``label`` (:meth:`Session.snapshot`)."""
        self.ctx.session.snapshot(label)

    def _on_change(self, ev: ChangeEvent) -> None:
        if ev.action in ("snapshot", "add_alternative"):
            self.refresh()
            return
        self.table.value = self.table_html()
        if not self.readouts.complete:  # the rest when the whole report is in
            return
        if "current" in (self.a.value, self.b.value) or ev.action == "restore":
            self._refresh_thumbs()

    def _on_complete(self) -> None:
        self.table.value = self.table_html()
        if "current" in (self.a.value, self.b.value):
            self._refresh_thumbs()

    def table_html(self) -> str:
        """The table of alternatives and their figures (HTML)."""
        alts = self.ctx.session.alternatives
        head = "".join(f"<th style='padding:0 8px'>{h}</th>" for _, h in COLUMNS)
        rows = []
        cur = self.readouts.report
        for lab, rep in [("current", cur)] + [(a.label, a.report) for a in alts]:
            cells = "".join(f"<td style='text-align:right;padding:0 8px'>"
                            f"{_figure(k, rep)}</td>" for k, _ in COLUMNS)
            rows.append(f"<tr><td>{html.escape(lab)}</td>{cells}</tr>")
        return (f"<table style='font-size:12px'><tr><th>label</th>{head}</tr>"
                + "".join(rows) + "</table>")

    def refresh(self) -> None:
        labels = ["current", "initial"] + [a.label for a in self.ctx.session.alternatives]
        for dd, default in ((self.a, "initial"), (self.b, "current")):
            keep = dd.value if dd.value in labels else default
            dd.options = labels
            dd.value = keep
        self.table.value = self.table_html()
        self._refresh_thumbs()

    def _fp_of(self, label: str) -> Floorplan:
        s = self.ctx.session
        if label == "current":
            return s.floorplan
        if label == "initial":
            return s.initial
        return s.alternative(label).floorplan

    def thumbnails(self, a: str, b: str, size: int = 220):
        """Side-by-side thumbnails of alternatives ``a`` and ``b`` (same canvas code, static)."""
        figs = []
        for lab in (a, b):
            f = thumbnail(self.ctx.design, self._fp_of(lab), size)
            f.title = lab
            f.fig_margin = dict(top=24, bottom=2, left=2, right=2)
            figs.append(f)
        return figs

    def _refresh_thumbs(self) -> None:
        a, b = self.a.value, self.b.value
        s = self.ctx.session
        if a is None or b is None or not s.alternatives:
            self.thumbs.children = []
            self.diff.value = ""
            return
        self.thumbs.children = self.thumbnails(a, b)
        cmp = s.compare(a, b)
        keys = ("hpwl", "density_overflow", "congestion_peak", "macro_overlaps")
        parts = [f"{k}: {cmp.metrics[k][2]:+.4g}" for k in keys
                 if k in cmp.metrics and cmp.metrics[k][2] is not None]
        self.diff.value = (f"<div style='font-size:12px'>B − A: {'; '.join(parts)}; "
                           f"{len(cmp.moved)} macro(s) moved</div>")
