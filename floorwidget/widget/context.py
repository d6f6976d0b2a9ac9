"""What the panels of one widget share: the Session, the canvas, the message line, the
selection (with its observers), the background runner, and the named buttons and toggles.

A panel is a small class that owns its controls and subscribes to the Session
(:meth:`Session.on_change`) and to the selection (:meth:`Context.on_select`) itself; the panels
never call each other, except where one reads a value another owns (named in its constructor).
"""

from __future__ import annotations

import html
import time
from collections.abc import Callable

import ipywidgets as W
import numpy as np

from .._threads import pool, settled
from ..design import Design, DesignError
from ..session import Session
from .canvas import Canvas

__all__ = ["BUSY", "Context", "Runner", "block_names"]

BUSY = "A placement run is still going; this request was refused (wait for it to finish)."


def block_names(design: Design, blocks, what: str) -> list[str]:
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


class Runner:
    """Placer runs on the package's shared thread pool (``floorwidget._threads``), one at a
    time, with a progress bar; a second request while one runs is refused, not queued."""

    def __init__(self, notify: Callable[..., None]):
        self.notify = notify
        self.progress = W.FloatProgress(value=0.0, min=0.0, max=1.0, description="",
                                        layout=W.Layout(width="160px", visibility="hidden"))
        self._future = None
        self._sync = False
        self.last_solve_s: float | None = None
        #: called with no arguments after every run that succeeded
        self.done: list[Callable[[], None]] = []

    @property
    def busy(self) -> bool:
        """Whether a run is going."""
        return self._sync or (self._future is not None and not self._future.done())

    def report_progress(self, stage: str, fraction: float, info: dict | None = None) -> None:
        """The placer's progress callback."""
        self.progress.value = float(min(max(fraction, 0.0), 1.0))
        self.progress.description = str(stage)[:12]

    def run(self, action: str, fn: Callable[[], None], wait: bool) -> bool:
        """Run ``fn`` (a Session call): in the caller's thread with ``wait``, else on the pool.

        Returns ``False`` (and says so) when a run is going already."""
        if self.busy:
            self.notify(BUSY, error=True)
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
                for cb in self.done:
                    cb()
            except Exception as e:  # noqa: BLE001 - shown in the panel, session unchanged
                self.notify(f"{action} failed: {e}", error=True)
                if wait:
                    raise
            finally:
                self.progress.layout.visibility = "hidden"
                self._sync = False

        if wait:
            self._sync = True
            work()
        else:
            self._future = pool("widget", 1).submit(work)
        return True

    def wait(self, timeout: float | None = None) -> bool:
        """Wait for a background run; ``True`` when none is left running."""
        return settled(self._future, timeout)


class Context:
    """The shared state of one widget (see the module notes).

    Attributes
    ----------
    session : Session
    canvas : Canvas
    message : ipywidgets.HTML
        The last notice.
    runner : Runner
    buttons, toggles : dict
        Every named button and toggle of every panel, by its label.
    """

    def __init__(self, session: Session, canvas: Canvas):
        self.session = session
        self.canvas = canvas
        self.message = W.HTML("", layout=W.Layout(min_height="18px"))
        self.message.add_class("fw-message")
        self.runner = Runner(self.notify)
        self.buttons: dict[str, W.Button] = {}
        self.toggles: dict[str, W.ToggleButton] = {}
        self._select_observers: list[Callable[[], None]] = []

    @property
    def design(self) -> Design:
        return self.session.design

    # --- messages and actions -----------------------------------------------------------------
    def notify(self, text: str, error: bool = False) -> None:
        """Show one line in the message area."""
        colour = "#D55E00" if error else "#333333"
        self.message.value = (f'<div style="color:{colour};font-size:12px">'
                              f"{html.escape(text)}</div>" if text else "")

    def ui(self, fn: Callable) -> None:
        """Run a control's action and show its failure in the message line instead of raising."""
        try:
            fn()
        except (DesignError, KeyError, RuntimeError, ValueError) as e:
            self.notify(str(e).strip("'\""), error=True)

    def refuse_if_busy(self) -> None:
        if self.runner.busy:
            self.notify(BUSY, error=True)
            raise RuntimeError(BUSY)

    def button(self, label: str, fn: Callable, tip: str = "", width: str = "auto",
               name: str | None = None) -> W.Button:
        """A button that runs ``fn`` through :meth:`ui`, registered under ``name or label``."""
        b = W.Button(description=label, tooltip=tip or label, layout=W.Layout(width=width))
        b.on_click(lambda _b: self.ui(fn))
        self.buttons[name or label] = b
        return b

    def toggle(self, label: str, value: bool, tip: str, width: str = "auto") -> W.ToggleButton:
        t = W.ToggleButton(value=value, description=label, tooltip=tip,
                           layout=W.Layout(width=width))
        self.toggles[label] = t
        return t

    # --- the selection --------------------------------------------------------------------------
    def on_select(self, callback: Callable[[], None]) -> None:
        """Call ``callback()`` whenever the selection (or the flyline source) changes."""
        self._select_observers.append(callback)

    def selection_changed(self) -> None:
        for cb in self._select_observers:
            cb()

    def select(self, blocks) -> None:
        """Select blocks (indices or names)."""
        d = self.design
        idx = [d.block(nm) for nm in block_names(d, blocks, "select")]
        self.canvas.select(idx)
        self.selection_changed()

    @property
    def selection(self) -> list[str]:
        return [self.design.names[i] for i in self.canvas.selected]

    def selected_names(self) -> list[str]:
        """The selected macros' names; refused when none is selected."""
        names = self.selection
        if not names:
            raise ValueError("Select one or more macros first (click, or Box select).")
        return names


def small_text(text: str) -> W.HTML:
    """A line of small grey help text."""
    return W.HTML(f"<span style='font-size:11px;color:#555'>{text}</span>")
