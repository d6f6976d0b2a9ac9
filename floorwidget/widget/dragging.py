"""The one drop path: a macro handle dragged on the canvas (or a test calling :meth:`drop`)
becomes one Session batch — move (snapped), pin — shown at once, and a refine in the background
(:meth:`Session.refine_later`) that joins that batch when it lands, so one undo reverts it; a
newer drag, undo or redo supersedes a refine still running.  While the drag is under way, the
HPWL change of the dragged macros' nets."""

from __future__ import annotations

import time
from concurrent.futures import Future
from typing import TYPE_CHECKING

import numpy as np

from .._threads import pool, settled
from ..design import FIXED, TERMINAL, DesignError
from ..metrics import nets_hpwl
from .context import BUSY, Context

if TYPE_CHECKING:
    from .readouts import Readouts

__all__ = ["Dragging"]


class Dragging:
    """Wires the canvas's drag handles to the Session.

    Attributes
    ----------
    refine_options : dict
        Options of the refine that follows a drop (``Live refine``).
    last_drag_delta : float or None
        The HPWL change of the last drag preview, µm.
    pending : concurrent.futures.Future or None
        The refine of the last drop (its result: landed or superseded, see
        :meth:`Session.refine_later`).
    """

    def __init__(self, ctx: Context, readouts: Readouts):
        self.ctx, self.readouts = ctx, readouts
        self.refine_options: dict = {}
        self.last_drag_delta: float | None = None
        self._drag: dict | None = None
        self.pending: Future | None = None
        c = ctx.canvas
        self.macro_idx = c.macro_idx
        h = c.marks["handles"]
        h.on_drag_start(lambda _m, ev: self.drag_start(ev["index"]))
        h.on_drag(lambda _m, ev: self.drag_preview(ev["index"], ev["point"]["x"],
                                                   ev["point"]["y"]))
        h.on_drag_end(lambda _m, ev: self.drop(ev["index"], ev["point"]["x"], ev["point"]["y"]))
        h.on_element_click(lambda _m, ev: ctx.select([int(self.macro_idx[ev["index"]])]))
        h.observe(self._on_brush, names=["selected"])
        self.terminal_idx = np.flatnonzero(ctx.design.kind == TERMINAL)
        c.marks["terminals"].on_drag_end(
            lambda _m, ev: self.drop_pin(ev["index"], ev["point"]["x"], ev["point"]["y"]))

    def _on_brush(self, change) -> None:
        sel = change["new"]
        if sel is not None:
            self.ctx.select(self.macro_idx[np.asarray(sel, dtype=np.intp)])

    def _group(self, i: int) -> np.ndarray:
        sel = self.ctx.canvas.selected
        if sel.size > 1 and i in sel:
            return sel
        return np.array([i], dtype=np.intp)

    def drag_start(self, index: int) -> None:
        """Remember the state a drag starts from (the live HPWL Δ is measured against it)."""
        i = int(self.macro_idx[index])
        grp = self._group(i)
        d, fp = self.ctx.design, self.ctx.session.floorplan
        nets = d.nets_of(grp)
        self._drag = {"index": int(index), "group": grp, "nets": nets,
                      "base": float(nets_hpwl(d, fp, nets).sum()), "fp": fp}

    def drag_preview(self, index: int, x: float, y: float) -> float:
        """During a drag: the HPWL change of the dragged macros' nets if dropped at centre (x, y).

        Only those nets are measured (:func:`floorwidget.metrics.nets_hpwl`), so this stays fast
        on large designs.  The dragged rectangles follow the handle.

        Returns
        -------
        float
            HPWL change, µm, against the state when the drag started.
        """
        if self._drag is None or self._drag["index"] != int(index) \
                or self._drag["fp"] is not self.ctx.session.floorplan:
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
        delta = float(nets_hpwl(self.ctx.design, tmp, dr["nets"]).sum()) - dr["base"]
        self.last_drag_delta = delta
        self.ctx.canvas.preview(tmp, grp)
        self.readouts.refresh(drag_delta=delta)
        return delta

    def _refused(self, out: dict, msg: str, fp) -> dict:
        self.ctx.notify(msg, error=True)
        self.ctx.canvas.update(fp)  # the handle goes back
        out["message"] = msg
        return out

    def drop(self, index: int, x: float, y: float, wait: bool = False) -> dict:
        """Handle a dropped macro handle: move (snapped) and pin, one undoable step shown at
        once; then, with "Live refine", a refine in the background that joins that step.

        Parameters
        ----------
        index : int
            Index of the handle (the macro's position among ``design.macros``).
        x, y : float
            New centre of the handle, µm (data coordinates).
        wait : bool
            Return only once the refine and the readouts' report are in (scripts, tests).

        Returns
        -------
        dict
            ``moved`` (names), ``refine`` (the background refine's future, or ``None``),
            ``refined`` (with ``wait``: whether it landed), ``seconds`` (until the moved
            macro and the quick readouts were shown), ``message``.
        """
        t0 = time.perf_counter()
        self._drag = None
        out = {"moved": [], "refine": None, "refined": False, "seconds": 0.0, "message": ""}
        ctx = self.ctx
        d, s, c = ctx.design, ctx.session, ctx.canvas
        nh = len(self.macro_idx)
        if isinstance(index, (bool, np.bool_)) or not isinstance(index, (int, np.integer)) \
                or not 0 <= int(index) < nh:  # -1 would silently take the last macro
            raise IndexError(f"drop: handle index {index!r} is not in 0..{nh - 1} "
                             f"(one handle per macro)")
        try:
            x, y = float(x), float(y)
        except (TypeError, ValueError):
            raise TypeError(f"drop: x and y must be numbers, got {x!r}, {y!r}") from None
        fp = s.floorplan
        if not (np.isfinite(x) and np.isfinite(y)):
            return self._refused(out, f"Drop refused: position ({x}, {y}) is not finite.", fp)
        i = int(self.macro_idx[index])
        cx, cy = fp.centres()
        dx, dy = x - cx[i], y - cy[i]
        if ctx.runner.busy:
            return self._refused(out, BUSY, fp)
        # less than half a pixel is a click, not a move
        if abs(dx) * c.px_per_um < 0.5 and abs(dy) * c.px_per_um < 0.5:
            ctx.select([i])
            return out
        grp = self._group(i)
        grp = grp[fp.status[grp] != FIXED]
        if grp.size == 0:
            self._refused(out, f"{d.names[i]} is fixed by the input and cannot be moved.", fp)
            out["message"] = "fixed"
            return out
        names = [d.names[j] for j in grp]
        label = f"drag {names[0]}" if len(names) == 1 else f"drag {len(names)} macros"
        msg = ""
        # the dropped macros become the selection; the change event below draws it once
        c.selected = np.unique(grp)
        c.focus_group = None
        try:
            with s.batch(label):
                for j, nm in zip(grp, names):
                    s.move(nm, float(fp.x[j]) + dx, float(fp.y[j]) + dy)
                if ctx.toggles["Pin on drop"].value:
                    s.pin(names)
            out["moved"] = names
        except (DesignError, KeyError) as e:  # the batch was rolled back: nothing moved
            msg = str(e)
            c.update(s.floorplan)
            ctx.selection_changed()
        if out["moved"] and ctx.toggles["Live refine"].value:
            try:
                out["refine"] = self._refine_later()
            except DesignError as e:  # refused before it ran (e.g. its options): the move stays
                msg = f"Refine skipped: {e}"
        ctx.notify(msg, error=bool(msg))
        out.update(message=msg, seconds=time.perf_counter() - t0)
        if wait and out["refine"] is not None:
            f = out["refine"]
            settled(f)
            out["refined"] = f.exception() is None and f.result()
            out["message"] = out["message"] or self._failure(f)
            self.readouts.wait()
        return out

    def drop_pin(self, index: int, x: float, y: float) -> dict:
        """Handle a dropped I/O pin: one ``Session.move`` to centre ``(x, y)``, which snaps it
        to the nearest free slot of its layer on the nearest edge its layer reaches.

        Parameters
        ----------
        index : int
            Index of the pin among the design's I/O terminals (in design order).
        x, y : float
            Where the pin's centre was dropped, µm.

        Returns
        -------
        dict
            ``moved`` (names), ``position`` (lower-left taken, or None), ``message``.
        """
        ctx, out = self.ctx, {"moved": [], "position": None, "message": ""}
        n = len(self.terminal_idx)
        if isinstance(index, (bool, np.bool_)) or not isinstance(index, (int, np.integer)) \
                or not 0 <= int(index) < n:
            raise IndexError(f"drop_pin: pin index {index!r} is not in 0..{n - 1}")
        s, i = ctx.session, int(self.terminal_idx[int(index)])
        fp = s.floorplan
        w, h = fp.sizes()
        if ctx.runner.busy:
            return self._refused(out, BUSY, fp)
        try:
            pos = s.move(ctx.design.names[i], float(x) - w[i] / 2, float(y) - h[i] / 2)
        except (DesignError, TypeError, ValueError) as e:  # nothing moved: the pin goes back
            return self._refused(out, str(e), fp)
        out.update(moved=[ctx.design.names[i]], position=pos)
        return out

    def _refine_later(self) -> Future:
        """The drop's refine on the widget's placer pool (so it queues with the panels' runs,
        never beside them); a failure is said in the message line, the move stays."""
        ctx, t0 = self.ctx, time.perf_counter()
        r = ctx.runner
        self.pending = f = ctx.session.refine_later(executor=pool("widget", 1),
                                                    progress=r.report_progress,
                                                    **self.refine_options)

        def done(f: Future) -> None:
            msg = self._failure(f)
            if msg:
                ctx.notify(msg, error=True)
            elif f.result():
                r.last_solve_s = time.perf_counter() - t0
                self.readouts.refresh()

        f.add_done_callback(done)
        return f

    @staticmethod
    def _failure(f: Future) -> str:
        e = f.exception()
        return "" if e is None else f"Refine skipped: {e}"

    def wait(self, timeout: float | None = None) -> bool:
        """Wait for the last drop's refine and the readouts' report; ``True`` when done."""
        return settled(self.pending, timeout) and self.readouts.wait(timeout)
