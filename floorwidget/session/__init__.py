"""The one door for changes to a floorplan: history, alternatives and a replayable record.

A :class:`Session` owns the *current* :class:`~floorwidget.design.Floorplan` of one design.
Every change — a hand move, pin, rotation or flip, a placer run, restoring an alternative —
goes through one of its methods, which

* validates the request and raises a clear one-line error (``TypeError`` for a name that is
  not text, :class:`~floorwidget.design.DesignError` for an unknown name, a bad value or a
  forbidden change,
  :class:`~floorwidget.placer.errors.PlacementError` for an infeasible placement) **without
  touching** the floorplan, the history or the log when it fails;
* records an undoable step (only the blocks that changed, old and new values, so undo and redo
  restore bit-exactly and a hand move costs a few bytes);
* appends the call and its arguments to the action log, which :meth:`Session.script` turns into
  plain Python that rebuilds the same floorplan in a fresh interpreter;
* notifies the observers registered with :meth:`Session.on_change` (the widget never polls).

The floorplan handed out by :attr:`Session.floorplan` is **read-only** (its arrays have
``writeable=False``); call ``.copy()`` for an editable one.  It is never changed afterwards:
each change produces a new object.

The figures in :attr:`Session.report` are early-floorplanning estimates; sign-off belongs to the
full implementation flow's timing, power and physical checks.

Examples
--------
>>> import floorwidget as fw
>>> design = fw.load("demo_data/heron_dsp.json")          # doctest: +SKIP
>>> s = fw.Session(design)                                 # doctest: +SKIP
>>> with s.batch("drag"):                                  # doctest: +SKIP
...     s.move(design.macros[0], 400.0, 300.0)
...     s.pin(design.macros[0])
>>> s.undo()                                               # doctest: +SKIP

The package, one concern a module (each imports only those listed before it):

* :mod:`~floorwidget.session.checks` — argument checks shared by every method and the file
  reader (block names, numbers, densities, replayable values);
* :mod:`~floorwidget.session.history` — steps, batches and the current floorplan, one step
  builder;
* :mod:`~floorwidget.session.actions` — the table of recorded actions, which the file reader
  and the script writer both check against;
* :mod:`~floorwidget.session.state` — :class:`SessionState`, the plain data that files and
  scripts are written from and read into; :class:`Alternative`, :class:`ChangeEvent`;
* :mod:`~floorwidget.session.compare` — :class:`Comparison`;
* :mod:`~floorwidget.session.files` and :mod:`~floorwidget.session.script` — session files and
  replay scripts, from and to a :class:`SessionState` only;
* :mod:`~floorwidget.session.edits`, :mod:`~floorwidget.session.constraints`,
  :mod:`~floorwidget.session.placing` — the hand edits, constraint edits and placer calls
  :class:`Session` is composed of (:mod:`~floorwidget.session.core`).
"""

from __future__ import annotations

from .actions import ACTIONS
from .compare import Comparison
from .core import Session
from .files import SESSION_FORMAT, SESSION_VERSION
from .placing import Superseded
from .state import SESSION_MAX_PINS, Alternative, ChangeEvent, SessionState

__all__ = ["ACTIONS", "Alternative", "ChangeEvent", "Comparison", "Session", "SessionState",
           "SESSION_FORMAT", "SESSION_MAX_PINS", "SESSION_VERSION", "Superseded"]
