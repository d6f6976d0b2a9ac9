"""The readouts, always in view: the report's figures of the current floorplan, the HPWL change
of the last edit and of a drag under way, and the caution that they are estimates.

They come in two stages after a change: the figures that are cheap at any size
(:meth:`Session.report_now`: HPWL and the macro checks) at once, the bin maps and the cell
checks when the background report (:meth:`Session.report_later`) is done; until then those
read "…".  A newer change supersedes a report not yet begun."""

from __future__ import annotations

import threading
from concurrent.futures import Future

import ipywidgets as W

from .._threads import settled
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
        #: whether :attr:`report` is the whole report (else the quick figures, the rest pending)
        self.complete = True
        #: the background report of the figures still pending, if any
        self.pending: Future | None = None
        #: called with no arguments when the whole report of the current state is shown
        self.completed: list = []
        self._lock = threading.RLock()  # a late background report never covers a newer change
        self.prev_hpwl: float | None = None
        self.box = self.html
        ctx.session.on_change(self._on_change)
        ctx.runner.done.append(self.refresh)  # the solve time, known once the run returns
        self.refresh()

    def _on_change(self, ev: ChangeEvent) -> None:
        if ev.action in ("snapshot", "add_alternative"):
            return
        ses = self.ctx.session
        with self._lock:
            prev = self.report
            self.report, self.complete = ses.report_now()
            self.prev_hpwl = prev.get("hpwl") if prev else None
            self.refresh()
        if not self.complete:
            fp = ses.floorplan
            self.pending = f = ses.report_later()
            f.add_done_callback(lambda f: self._report_done(f, fp))

    def _report_done(self, f: Future, fp) -> None:
        """The background report is in: show it if the floorplan is still the one it is of."""
        rep = None if f.cancelled() or f.exception() is not None else f.result()
        with self._lock:
            if rep is None or self.ctx.session.floorplan is not fp:
                return
            self.report, self.complete = rep, True
            self.refresh()
        for cb in self.completed:
            cb()

    def wait(self, timeout: float | None = None) -> bool:
        """Wait for the background report; ``True`` when none is left running."""
        return settled(self.pending, timeout)

    def refresh(self, drag_delta: float | None = None) -> None:
        """Redraw the table; ``drag_delta`` adds the HPWL change of a drag under way."""
        r = self.report
        dash = fmt.DASH if self.complete else "…"  # "…": coming from the background report

        def v(key: str, unit: str = "") -> str:
            return fmt.value(r.get(key), unit=unit, none=dash)

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
            ("Density overflow", v("density_overflow")),
            ("Congestion peak / p99 (of supply)",
             f"{v('congestion_peak')} / {v('congestion_p99')}"),
            ("Macro overlaps", f"{v('macro_overlaps')} pairs, "
                               f"{v('macro_overlap_area', ' µm²')}"),
            ("Out of die / off grid", f"{v('out_of_die')} / {v('off_grid')}"),
            ("Legal", v("legal")),
            ("Narrow channels", f"{v('narrow_channels')} pairs"),
            ("Pins to a wall", f"{v('macros_facing_wall')} macros"),
            ("Logic regions", f"{v('logic_regions')}, largest "
                              f"{fmt.percent(r.get('largest_logic_region'), dash)} "
                              "of the free area"),
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
                       f"<td style='text-align:right' class='fw-{k.split()[0].lower()}'>{val}</td>"
                       f"</tr>" for k, val in rows)
        stage = "fw-complete" if self.complete else "fw-staged"
        self.html.value = (f"<table class='{stage}' style='font-size:12px;line-height:1.25'>"
                           f"{body}</table>"
                           "<div style='font-size:11px;line-height:1.25;color:#555'>"
                           f"{CAUTION}</div>")
