"""The Edit tab: what a drop does, a macro's exact position and orientation, nudges and
offsets, and arrangements of the selection (align, even gaps, arrays, mirror, to the core
edge).  Every edit is one Session call or one batch: one undo step."""

from __future__ import annotations

import ipywidgets as W

from ..design import ORIENTATIONS
from ..kernels import fmt
from .context import Context, small_text

__all__ = ["EditPanel"]


class EditPanel:
    """Owns the edit controls; follows the selection by itself."""

    def __init__(self, ctx: Context, live: bool = True, pin_on_drop: bool = True):
        self.ctx = ctx
        b = ctx.button
        px, py = (float(v) for v in ctx.design.grid_pitch)
        small = {"description_width": "initial"}

        def num(label, tip, width="100px"):
            return W.FloatText(description=label, tooltip=tip, style=small,
                               layout=W.Layout(width=width))

        drops = [ctx.toggle("Live refine", live, "Refine after every drop"),
                 ctx.toggle("Pin on drop", pin_on_drop, "Pin a macro where it is dropped")]
        self.x = num("x", "Lower-left corner x, µm (snaps to the placement grid)")
        self.y = num("y", "Lower-left corner y, µm (snaps to the placement grid)")
        self.orient = W.Dropdown(options=list(ORIENTATIONS), tooltip="Orientation",
                                 layout=W.Layout(width="64px"))
        for wdg, cls in ((self.x, "fw-edit-x"), (self.y, "fw-edit-y"),
                         (self.orient, "fw-edit-orient")):
            wdg.add_class(cls)  # stable hooks for the browser test
        set_b = b("Set", self.apply, "Put the selected macro at x, y in this orientation "
                  "(one undo step)")
        steps = [("◀", -px, 0.0, "left"), ("▶", px, 0.0, "right"), ("▲", 0.0, py, "up"),
                 ("▼", 0.0, -py, "down")]
        nudges = [b(g, lambda dx=dx, dy=dy: self.shift(self.ctx.selected_names(), dx, dy),
                    f"Nudge the selection {w} by one grid step (or the arrow keys over the "
                    "canvas; Shift: ten steps)") for g, dx, dy, w in steps]
        self.dx = num("dx", "Offset x, µm", "92px")
        self.dy = num("dy", "Offset y, µm", "92px")
        by = b("Move by", lambda: self.shift(self.ctx.selected_names(), self.dx.value,
                                             self.dy.value),
               "Move the selection by dx, dy as one group")
        self.align_side = W.Dropdown(
            options=[("left edges", "left"), ("right edges", "right"),
                     ("bottom edges", "bottom"), ("top edges", "top"),
                     ("centres in a column", "x_centre"), ("centres in a row", "y_centre")],
            value="left", layout=W.Layout(width="160px"))
        align = b("Align", lambda: self._arrange("align", self.align_side.value),
                  "Line the selected macros up")
        even = [b("Even gaps ↔", lambda: self._arrange("distribute", "x"),
                  "Equal gaps from left to right; the outer two stay"),
                b("Even gaps ↕", lambda: self._arrange("distribute", "y"),
                  "Equal gaps from bottom to top; the outer two stay")]
        self.rows = W.BoundedIntText(value=2, min=1, max=10_000, description="rows",
                                     style=small, layout=W.Layout(width="96px"))
        self.cols = W.BoundedIntText(value=2, min=1, max=10_000, description="cols",
                                     style=small, layout=W.Layout(width="96px"))
        self.pitch_x = num("pitch x", "Column step, µm; 0: abutted (halos apart)", "110px")
        self.pitch_y = num("y", "Row step, µm; 0: abutted (halos apart)", "80px")
        arr = b("Array", self._array, "Fill an array, in selection order, bottom row first; "
                "pitch 0 abuts the cells under the halo rule")
        mirrors = [b("Mirror ↔", lambda: self._arrange("mirror", "x"),
                     "Swap left and right about the group's centre"),
                   b("Mirror ↕", lambda: self._arrange("mirror", "y"),
                     "Swap top and bottom about the group's centre"),
                   b("To core edge", lambda: self._arrange("push"),
                     "Move the group to the nearest core edge")]
        self.box = W.VBox([
            W.HBox(drops),
            W.HTML("<b>Exact position</b> <span style='font-size:11px'>(µm, lower-left "
                   "corner)</span>"),
            W.HBox([self.x, self.y, self.orient, set_b]),
            W.HBox(nudges + [small_text(f"one step = {px:g} × {py:g} µm")]),
            W.HBox([self.dx, self.dy, by]),
            W.HTML("<b>Arrange selected</b> <span style='font-size:11px'>(pinned macros are "
                   "refused; unpin first)</span>"),
            W.HBox([self.align_side, align]), W.HBox(even),
            W.HBox([self.rows, self.cols]), W.HBox([self.pitch_x, self.pitch_y, arr]),
            W.HBox(mirrors)])
        ctx.on_select(self.refresh)
        ctx.session.on_change(lambda ev: None if ev.action in ("snapshot", "add_alternative")
                              else self.refresh())
        self.refresh()

    def refresh(self) -> None:
        """Fill the exact-position fields from the one selected macro (else disable them)."""
        sel = self.ctx.canvas.selected
        one = sel.size == 1
        for wdg in (self.x, self.y, self.orient, self.ctx.buttons["Set"]):
            wdg.disabled = not one
        if one:
            i, fp, d = int(sel[0]), self.ctx.session.floorplan, self.ctx.design
            cur = ORIENTATIONS[fp.orient[i]]
            allowed = d.allowed_orientations(d.names[i])
            self.orient.options = allowed if cur in allowed else [cur, *allowed]
            self.x.value, self.y.value = float(fp.x[i]), float(fp.y[i])
            self.orient.value = cur

    def apply(self) -> None:
        """Put the one selected macro at the typed x, y and orientation (one undo step).

        The orientation is set first (its centre kept); the corner moves only when x or y was
        changed, so a new orientation alone turns the macro in place.
        """
        names = self.ctx.selected_names()
        if len(names) != 1:
            raise ValueError("Select exactly one macro to type its position.")
        self.ctx.refuse_if_busy()
        nm, s = names[0], self.ctx.session
        i = self.ctx.design.block(nm)
        x0, y0 = float(s.floorplan.x[i]), float(s.floorplan.y[i])
        x, y, o = float(self.x.value), float(self.y.value), self.orient.value
        with s.batch(f"edit {nm}"):
            if o != s.floorplan.orientation(nm):
                s.set_orientation(nm, o)
            if (x, y) != (x0, y0):
                s.move(nm, x, y)
        self._after("Placed", [nm])

    def _array(self) -> None:
        # 0 (or less) on an axis abuts the cells along it
        px, py = (float(v) if v > 0 else None for v in (self.pitch_x.value, self.pitch_y.value))
        pitch = None if px is None and py is None else (px, py)
        self._arrange("array", int(self.rows.value), int(self.cols.value), pitch)

    def _arrange(self, op: str, *args) -> None:
        self.arrange(op, self.ctx.selected_names(), *args)

    def _after(self, verb: str, names, res=None, detail: str = "") -> None:
        """Say what an edit did, what was adjusted and whether the floorplan is still legal."""
        names = [names] if isinstance(names, str) else list(names)
        what = names[0] if len(names) == 1 else f"{len(names)} macros"
        if detail:
            what += f" ({detail})"
        notes = res.notes if res is not None else ()
        parts = [f"{verb} {what}."] + [f"{n[:1].upper()}{n[1:]}." for n in notes]
        rep = self.ctx.session.report
        if not rep.get("legal", True):
            parts.append(f"Not legal now: {fmt.value(rep.get('macro_overlaps'))} macro conflict "
                         "pair(s) under the halo rule; see the readouts.")
        self.ctx.notify(" ".join(parts))

    #: Session arrangement -> the verb of its message
    VERBS = {"align": "Aligned", "distribute": "Spaced", "array": "Arrayed",
             "mirror": "Mirrored", "push": "Moved", "shift": "Moved"}

    def arrange(self, op: str, names, *args):
        """Session arrangement ``op`` (:attr:`VERBS`) of ``names``, with a message."""
        self.ctx.refuse_if_busy()
        res = getattr(self.ctx.session, op)(names, *args)
        detail = ""
        if op == "array":
            detail = ", ".join(f"{k} step {v:g} µm"
                               for k, v in zip(("column", "row"), res.pitch) if v)
        self._after(self.VERBS[op], names, res, detail)
        return res

    def shift(self, names, dx: float, dy: float):
        """:meth:`Session.shift` with a message."""
        return self.arrange("shift", names, dx, dy)

    def nudge(self, steps_x: int, steps_y: int) -> None:
        """Move the selection by whole grid steps (the arrow keys)."""
        px, py = (float(v) for v in self.ctx.design.grid_pitch)
        self.shift(self.ctx.selected_names(), steps_x * px, steps_y * py)


