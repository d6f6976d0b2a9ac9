"""Keyboard shortcuts over the canvas and the canvas's size on screen, through ipyevents (a
maintained events widget: ``pip install ipyevents``; without it the widget works by mouse and
buttons only, and labels are fitted for the canvas's smallest size).

Over the canvas: the arrow keys nudge the selection one grid step (with Shift, ten), Ctrl+Z
(or Cmd+Z) undoes, Ctrl+Y or Ctrl+Shift+Z redoes, Escape clears the selection.  Every key is
one Session call, as the buttons are.
"""

from __future__ import annotations

from collections.abc import Callable

from .context import Context

__all__ = ["ARROWS", "Keys"]

#: Arrow key -> grid steps (x, y)
ARROWS = {"ArrowLeft": (-1, 0), "ArrowRight": (1, 0), "ArrowUp": (0, 1), "ArrowDown": (0, -1)}


class Keys:
    """Listens to the canvas figure.

    Parameters
    ----------
    ctx : Context
    nudge : callable
        ``nudge(steps_x, steps_y)``: moves the selection.

    Attributes
    ----------
    available : bool
        Whether ipyevents is installed (else nothing listens).
    """

    def __init__(self, ctx: Context, nudge: Callable[[int, int], None]):
        self.ctx, self.nudge = ctx, nudge
        try:
            from ipyevents import Event
        except ImportError:
            self.available = False
            return
        self.available = True
        fig = ctx.canvas.figure
        self.keys = Event(source=fig, watched_events=["keydown"], prevent_default_action=True,
                          ignore_modifier_key_events=True)
        self.keys.on_dom_event(self.handle)
        # the figure's size on screen, whenever the mouse comes in or lets go (after a resize
        # of the notebook the next visit refits the labels)
        self.size = Event(source=fig, watched_events=["mouseenter", "mouseup"])
        self.size.on_dom_event(self._sized)

    def _sized(self, ev: dict) -> None:
        w, h = ev.get("boundingRectWidth"), ev.get("boundingRectHeight")
        if w and h:
            self.ctx.canvas.set_screen_size(float(w), float(h))

    def handle(self, ev: dict) -> bool:
        """Act on one key event (a dict as ipyevents sends it); ``True`` when it was ours."""
        if ev.get("type") != "keydown":
            return False
        key = ev.get("key", "")
        ctrl = bool(ev.get("ctrlKey") or ev.get("metaKey"))
        s, ctx = self.ctx.session, self.ctx
        if key in ARROWS and not ctrl:
            k = 10 if ev.get("shiftKey") else 1
            sx, sy = ARROWS[key]
            ctx.ui(lambda: self.nudge(k * sx, k * sy))
        elif ctrl and key.lower() == "z":
            ctx.ui(lambda: (ctx.refuse_if_busy(), s.redo() if ev.get("shiftKey") else s.undo()))
        elif ctrl and key.lower() == "y":
            ctx.ui(lambda: (ctx.refuse_if_busy(), s.redo()))
        elif key == "Escape":
            ctx.select([])
        else:
            return False
        return True
