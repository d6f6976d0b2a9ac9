"""The floorplanning widget: a large canvas with a compact toolbar, the readouts always in view,
the rest in tabs (View, Edit, Constraints, Regions), the alternatives along the bottom.

The widget holds no placement logic.  It composes panels (:mod:`.toolbar`, :mod:`.readouts`,
:mod:`.details`, :mod:`.view`, :mod:`.edit`, :mod:`.constraints`, :mod:`.regions`,
:mod:`.alternatives`, :mod:`.dragging`, :mod:`.keys`); each owns its controls and subscribes to
the Session (:meth:`Session.on_change`) and to the selection itself.  Mouse events become
Session calls (a drop is :meth:`FloorplanWidget.drop`); the methods below are the same Session
calls for scripts and tests.  The figures shown are early-floorplanning estimates; sign-off
belongs to the full implementation flow.  The candidates view (:mod:`.candidates`) sits under
the alternatives.
"""

from __future__ import annotations

import ipywidgets as W

from ..design import Design, Floorplan
from ..session import Session
from .alternatives import AlternativesPanel
from .candidates import CandidatesPanel
from .canvas import Canvas
from .constraints import ConstraintsPanel
from .context import Context, block_names
from .details import DetailsPanel
from .dragging import Dragging
from .edit import EditPanel
from .keys import Keys
from .readouts import CAUTION, Readouts
from .regions import RegionsPanel
from .toolbar import Toolbar
from .view import ViewPanel

__all__ = ["CAUTION", "FloorplanWidget"]

#: Height of the canvas and the side column: the window less the notebook's own bars, the
#: toolbar and the alternatives' header, so that the widget fits the window without scrolling
HEIGHT = "calc(100vh - 340px)"
#: Width of the side column (readouts, details, tabs)
SIDE = "330px"


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
        The smallest side of the canvas, pixels; the canvas fills the width it is given and
        the window's height.
    live : bool
        Rerun :meth:`Session.refine` after every drop ("Live refine").
    pin_on_drop : bool
        Pin a macro when it is dropped ("Pin on drop").

    Attributes
    ----------
    session : Session
    canvas : Canvas
    toolbar, readouts, details, view, edit, constraints, regions, alternatives, candidates
        The panels.
    runner : Runner
        Placer runs on the shared thread pool, and their progress bar.
    message : ipywidgets.HTML
        The last notice (a refused request, an error from the session).
    buttons, toggles : dict
        Every named button and toggle, by label.

    Examples
    --------
    >>> import floorwidget as fw
    >>> d = fw.load("demo_data/heron_dsp.json")         # doctest: +SKIP
    >>> w = fw.FloorplanWidget(d); w                       # doctest: +SKIP
    >>> w.move(d.macros[0], 100.0, 100.0); w.refine()     # doctest: +SKIP
    """

    def __init__(self, design: Design, floorplan: Floorplan | None = None, *,
                 session: Session | None = None, size: int = 320, live: bool = True,
                 pin_on_drop: bool = True, target_density: float = 0.8):
        self.session = session if session is not None else Session(
            design, floorplan, target_density=target_density)
        self.canvas = Canvas(self.session.design, self.session.floorplan, size=size,
                             interactive=True, fluid=True)
        self.macro_idx = self.canvas.macro_idx
        self.place_options: dict = {}
        ctx = self._ctx = Context(self.session, self.canvas)
        self.runner = ctx.runner
        # the canvas first, so that every panel sees the marks of the new state
        self.session.on_change(lambda ev: None if ev.action in ("snapshot", "add_alternative")
                               else self.canvas.update(ev.floorplan))
        self.readouts = Readouts(ctx)
        self.details = DetailsPanel(ctx)
        self.view = ViewPanel(ctx)
        self.edit = EditPanel(ctx, live=live, pin_on_drop=pin_on_drop)
        self.constraints = ConstraintsPanel(ctx)
        self.regions = RegionsPanel(ctx, self.view)
        self.alternatives = AlternativesPanel(ctx, self.readouts)
        self.candidates = CandidatesPanel(ctx)
        self.dragging = Dragging(ctx, self.readouts)
        self.toolbar = Toolbar(ctx, {"place": self.place, "refine": self.refine,
                                     "legalize": self.legalize, "expand": self.expand},
                               on_draw=self._draw)
        self.shortcuts = Keys(ctx, self.edit.nudge)

        tabs = W.Tab([self.view.box, self.edit.box, self.constraints.box, self.regions.box],
                     layout=W.Layout(flex="1 1 auto", overflow="hidden auto", min_height="160px"))
        for k, t in enumerate(("View", "Edit", "Constraints", "Regions")):
            tabs.set_title(k, t)
        self.tabs = tabs
        side = W.VBox([ctx.message, self.readouts.box, self.details.box, tabs],
                      layout=W.Layout(width=SIDE, min_width=SIDE, height=HEIGHT,
                                      min_height=f"{size}px", margin="0 0 0 8px",
                                      overflow="hidden auto"))
        side.add_class("fw-side")
        fig_box = W.Box([self.canvas.figure],
                        layout=W.Layout(flex="1 1 0%", height=HEIGHT, min_height=f"{size}px",
                                        min_width=f"{size}px"))
        fig_box.add_class("fw-canvas")
        main = W.HBox([fig_box, side], layout=W.Layout(flex_flow="row wrap", width="100%"))
        bottom = W.Accordion([self.alternatives.box, self.candidates.box], selected_index=None,
                             layout=W.Layout(width="100%"))
        bottom.set_title(0, "Alternatives: keep, compare, restore")
        bottom.set_title(1, "Candidates: K macro arrangements side by side")
        super().__init__([self.toolbar.box, main, bottom], layout=W.Layout(width="100%"))
        self.add_class("fw-widget")

    # --- what the panels share ------------------------------------------------------------------
    @property
    def design(self) -> Design:
        """The design with the constraints in force (:attr:`Session.design`)."""
        return self.session.design

    @property
    def message(self) -> W.HTML:
        return self._ctx.message

    @property
    def buttons(self) -> dict:
        return self._ctx.buttons

    @property
    def toggles(self) -> dict:
        return self._ctx.toggles

    def notify(self, text: str, error: bool = False) -> None:
        """Show one line in the message area."""
        self._ctx.notify(text, error)

    def _draw(self, mode: str, x0: float, y0: float, x1: float, y1: float) -> None:
        (self.regions if mode == "Draw region" else self.constraints).draw(x0, y0, x1, y1)

    # --- the selection and the view -------------------------------------------------------------
    @property
    def selection(self) -> list[str]:
        """Names of the selected macros."""
        return self._ctx.selection

    def select(self, blocks) -> None:
        """Select blocks (indices or names): highlight them, draw their flylines, show details."""
        self._ctx.select(blocks)

    def find(self, query: str) -> list[str]:
        """Find blocks by name and show them (:meth:`ViewPanel.find`)."""
        return self.view.find(query)

    def colour_by_groups(self, on: bool = True, depth: int | None = None,
                         separators: str | None = None) -> None:
        """Colour by hierarchy group (:meth:`ViewPanel.colour_by_groups`)."""
        self.view.colour_by_groups(on, depth, separators)

    def show_group(self, group) -> None:
        """A hierarchy group as the flyline source (:meth:`ViewPanel.show_group`)."""
        self.view.show_group(group)

    # --- dragging ---------------------------------------------------------------------------------
    def drag_start(self, index: int) -> None:
        """:meth:`Dragging.drag_start`."""
        self.dragging.drag_start(index)

    def drag_preview(self, index: int, x: float, y: float) -> float:
        """:meth:`Dragging.drag_preview`: the HPWL change of the dragged macros' nets."""
        return self.dragging.drag_preview(index, x, y)

    def drop(self, index: int, x: float, y: float, wait: bool = False) -> dict:
        """A dropped macro handle: move (snapped) and pin at once, refine in the background —
        one undoable step (:meth:`Dragging.drop`, the method the canvas's drag-end callback
        calls); ``wait`` returns once the refine and the readouts are in."""
        return self.dragging.drop(index, x, y, wait)

    def drop_pin(self, index: int, x: float, y: float) -> dict:
        """A dropped I/O pin: it snaps to a free slot on the die edge through
        ``Session.move`` (:meth:`Dragging.drop_pin`)."""
        return self.dragging.drop_pin(index, x, y)

    # --- edits (the panels' Session calls, for scripts) -------------------------------------------
    def apply_edit(self) -> None:
        """The Edit tab's Set: the selected macro at the typed position and orientation."""
        self.edit.apply()

    def align(self, names, side: str):
        """:meth:`Session.align`, with a message in the panel (as the other arrangements)."""
        return self.edit.arrange("align", names, side)

    def distribute(self, names, axis: str = "x"):
        """:meth:`Session.distribute`."""
        return self.edit.arrange("distribute", names, axis)

    def array(self, names, rows: int, cols: int, pitch=None):
        """:meth:`Session.array`."""
        return self.edit.arrange("array", names, rows, cols, pitch)

    def mirror(self, names, axis: str = "x"):
        """:meth:`Session.mirror`."""
        return self.edit.arrange("mirror", names, axis)

    def push(self, names, side: str | None = None):
        """:meth:`Session.push`."""
        return self.edit.arrange("push", names, side)

    def shift(self, names, dx: float, dy: float):
        """:meth:`Session.shift`."""
        return self.edit.shift(names, dx, dy)

    def set_orientation(self, name: str, orientation: str):
        """:meth:`Session.set_orientation`."""
        self._ctx.refuse_if_busy()
        return self.session.set_orientation(name, orientation)

    def draw_blockage(self, x0: float, y0: float, x1: float, y1: float) -> int:
        """A placement blockage over the rectangle (what the "Draw blockage" mode does)."""
        return self.constraints.draw(x0, y0, x1, y1)

    def select_blockage(self, k) -> None:
        """Select placement blockage ``k`` (``None``: none) for the editor."""
        self.constraints.select(k)

    def drop_blockage(self, k: int, x: float, y: float) -> None:
        """A blockage handle dropped at centre ``(x, y)``."""
        self.constraints.drop(k, x, y)

    def draw_region(self, x0: float, y0: float, x1: float, y1: float) -> str:
        """A cell region over the rectangle (what the "Draw region" mode does)."""
        return self.regions.draw(x0, y0, x1, y1)

    def assign_picked_group(self) -> int:
        """The hierarchy group picked in the View tab into the region picked in Regions."""
        return self.regions.assign_picked_group()

    def keep(self, label: str) -> None:
        """Keep the current floorplan as alternative ``label`` (:meth:`Session.snapshot`)."""
        self.alternatives.keep(label)

    def find_candidates(self, k: int = 3, *, wait: bool = True) -> bool:
        """K macro arrangements side by side (:meth:`CandidatesPanel.find`); ``wait=False``
        runs them in the background."""
        return self.candidates.find(k, wait=wait)

    # --- placer runs ------------------------------------------------------------------------------
    @property
    def busy(self) -> bool:
        """Whether a placement run is going."""
        return self._ctx.runner.busy

    @property
    def last_solve_s(self) -> float | None:
        """Seconds of the last placer call (a run, or the refine after a drop)."""
        return self._ctx.runner.last_solve_s

    @property
    def refine_options(self) -> dict:
        """Options of every refine (a drop's and the button's)."""
        return self.dragging.refine_options

    def wait(self, timeout: float | None = None) -> bool:
        """Wait for a background run (and a drop's refine and the readouts' report) to finish;
        ``True`` when none is left running."""
        return self._ctx.runner.wait(timeout) and self.dragging.wait(timeout)

    def place(self, *, wait: bool = True, **options) -> bool:
        """Global placement (:meth:`Session.place`); ``wait=False`` runs it in the background.

        Returns ``False`` (and says so in the panel) when a run is already going: a second
        request is refused, not queued.
        """
        opts = {**self.place_options, **options}
        if self.toolbar.layout_style.value != "auto":  # "auto" is the placer's default
            opts.setdefault("macro_layout", self.toolbar.layout_style.value)
        r = self._ctx.runner
        return r.run("Place", lambda: self.session.place(progress=r.report_progress, **opts),
                     wait)

    def refine(self, *, wait: bool = True, **options) -> bool:
        """Incremental improvement (:meth:`Session.refine`)."""
        opts = {**self.refine_options, **options}
        r = self._ctx.runner
        return r.run("Refine", lambda: self.session.refine(progress=r.report_progress, **opts),
                     wait)

    def legalize(self, *, wait: bool = True, **options) -> bool:
        """Macro legalisation (:meth:`Session.legalize`)."""
        return self._ctx.runner.run("Legalise", lambda: self.session.legalize(**options), wait)

    def expand(self, *, wait: bool = True, **options) -> bool:
        """Every cell of the full design placed around the current macros
        (:meth:`Session.expand`, clustered sessions only), with the progress bar; the result
        is ``session.expanded``.  ``wait=False`` runs it in the background."""
        if not self.session.clustered:
            self.notify("This design is shown cell by cell already; nothing to expand.",
                        error=True)
            return False
        r = self._ctx.runner
        return r.run("Expand", lambda: self.session.expand(progress=r.report_progress,
                                                            **options), wait)

    # --- proxies to the session (same names as Session) -------------------------------------------
    def move(self, name: str, x: float, y: float):
        """:meth:`Session.move`."""
        self._ctx.refuse_if_busy()
        return self.session.move(name, x, y)

    def pin(self, names) -> None:
        """:meth:`Session.pin` (names or block indices, like :meth:`select`)."""
        names = block_names(self.design, names, "pin")
        self._ctx.refuse_if_busy()
        self.session.pin(names)

    def unpin(self, names) -> None:
        """:meth:`Session.unpin` (names or block indices, like :meth:`select`)."""
        names = block_names(self.design, names, "unpin")
        self._ctx.refuse_if_busy()
        self.session.unpin(names)

    def rotate(self, name: str) -> None:
        """:meth:`Session.rotate`."""
        self._ctx.refuse_if_busy()
        self.session.rotate(name)

    def flip(self, name: str) -> None:
        """:meth:`Session.flip`."""
        self._ctx.refuse_if_busy()
        self.session.flip(name)

    def undo(self) -> None:
        """:meth:`Session.undo`."""
        self._ctx.refuse_if_busy()
        self.session.undo()

    def redo(self) -> None:
        """:meth:`Session.redo`."""
        self._ctx.refuse_if_busy()
        self.session.redo()

    @property
    def floorplan(self) -> Floorplan:
        """The session's current floorplan."""
        return self.session.floorplan

    @property
    def report(self) -> dict:
        """The session's current report (early-floorplanning estimates)."""
        return self.session.report
