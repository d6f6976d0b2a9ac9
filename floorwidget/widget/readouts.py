"""The readouts, always in view: the report's figures of the current floorplan, the HPWL change
of the last edit and of a drag under way, and the caution that they are estimates."""

from __future__ import annotations

import ipywidgets as W

from ..kernels import fmt
from ..session import ChangeEvent
from .context import Context

__all__ = ["CAUTION", "Readouts"]

CAUTION = ("Early-floorplanning estimates for comparing choices; sign-off belongs to the full "
           "implementation flow's timing, power and physical checks.")


class Readouts:
    """The figures table; follows the Session by itself."""

    def __init__(self, ctx: Context):
        self.ctx = ctx
        self.html = W.HTML("")
        self.html.add_class("fw-readouts")
        self.report: dict = ctx.session.report
        self.prev_hpwl: float | None = None
        self.box = self.html
        ctx.session.on_change(self._on_change)
        ctx.runner.done.append(self.refresh)  # the solve time, known once the run returns
        self.refresh()

    def _on_change(self, ev: ChangeEvent) -> None:
        if ev.action in ("snapshot", "add_alternative"):
            return
        prev = self.report
        self.report = self.ctx.session.report
        self.prev_hpwl = prev.get("hpwl") if prev else None
        self.refresh()

    def refresh(self, drag_delta: float | None = None) -> None:
        """Redraw the table; ``drag_delta`` adds the HPWL change of a drag under way."""
        r = self.report
        hp = r.get("hpwl")
        delta = None if self.prev_hpwl is None or hp is None else hp - self.prev_hpwl
        info = self.ctx.session.floorplan.info
        solve = self.ctx.runner.last_solve_s
        solve = info.get("seconds") if solve is None else solve
        rows = [("HPWL", fmt.value(hp, unit=" µm")),
                ("Δ HPWL (last change)", "–" if delta is None else f"{delta:+,.1f} µm")]
        if drag_delta is not None:
            rows.append(("Δ HPWL while dragging", f"{drag_delta:+,.1f} µm (its nets)"))
        rows += [
            ("Density overflow", fmt.value(r.get("density_overflow"))),
            ("Congestion peak / p99 (of supply)", f"{fmt.value(r.get('congestion_peak'))} / "
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
        ses = self.ctx.session
        if ses.clustered:  # the figures are those of the clusters: say so, and what stands
            full = ses.full_design
            rows.insert(0, ("Showing", f"{ses.design.num_blocks:,} blocks for "
                                       f"{full.num_blocks:,} (clustered)"))
            rows.append(("Cells placed", "yes (Expand cells)" if ses.expanded is not None
                         else "no — Expand cells"))
        body = "".join(f"<tr><td style='padding-right:10px'>{k}</td>"
                       f"<td style='text-align:right' class='fw-{k.split()[0].lower()}'>{v}</td>"
                       f"</tr>" for k, v in rows)
        self.html.value = (f"<table style='font-size:12px;line-height:1.25'>{body}</table>"
                           "<div style='font-size:11px;line-height:1.25;color:#555'>"
                           f"{CAUTION}</div>")
