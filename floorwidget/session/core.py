"""The :class:`Session` class, composed of the hand edits, the constraint edits and the placer
calls (mixins), over a :class:`~floorwidget.session.history.History`.

Alternatives, comparison, observers, undo/redo and batches live here; saving, loading and the
replay script go through a :class:`~floorwidget.session.state.SessionState`.
"""

from __future__ import annotations

import contextlib
import threading
import warnings
from collections import OrderedDict
from collections.abc import Callable, Iterator, Mapping, Sequence
from concurrent.futures import Executor, Future
from typing import Any

import numpy as np

from .._threads import pool
from ..design import Design, DesignError, Floorplan
from . import checks
from .actions import ACTIONS
from .compare import Comparison
from .constraints import ConstraintEdits
from .edits import HandEdits, locked
from .history import History, freeze
from .pins import PinCalls
from .placing import PlacerCalls
from .power import PowerEdits
from .state import Alternative, ChangeEvent, SessionState, is_large, now

__all__ = ["Session"]

_REPORT_CACHE = 32  # reports kept for recently visited states (undo/redo hits them)


def _copy_log(v):
    """Copy log entries (containers copied, read-only floorplans shared)."""
    if isinstance(v, dict):
        return {k: _copy_log(x) for k, x in v.items()}
    if isinstance(v, list):
        return [_copy_log(x) for x in v]
    return v


class Session(HandEdits, ConstraintEdits, PlacerCalls, PinCalls, PowerEdits):
    """Interactive editing of one design's floorplan with undo, alternatives and a record.

    Parameters
    ----------
    design : Design
        The design (treated as read-only; never modified).
    floorplan : Floorplan, optional
        Starting floorplan (default: ``design.initial``).  It is copied, never modified.
    target_density : float
        Used by :attr:`report` and as the default of :meth:`place` and :meth:`refine`.
    clustered : bool, optional
        Work on a clustered version of the design (:func:`floorwidget.placer.coarsen`):
        :attr:`design` is then the coarsest level — macros, terminals, pinned and fixed blocks
        as they are, the standard cells merged into soft clusters of about equal area — so
        moves, refine and the readouts stay interactive on designs of millions of cells;
        :meth:`expand` places the cells of the full design.  Default: clustered where
        :func:`floorwidget.placer.place` goes multilevel
        (:data:`floorwidget.placer.flow.MULTILEVEL_MIN` movable standard cells).  (The
        clustered design has no movable standard cells: a lone cell is a cluster of one.)

    Attributes
    ----------
    design : Design
        The design edited: the input design, or its clustered version.
    full_design : Design
        The input design.
    clustering : Clustering or None
        The levels of the clustered version (``None`` for a flat session).
    target_density : float
    progress : callable or None
        Default ``progress(stage, fraction, info)`` for placer calls (e.g. the widget's bar).

    Notes
    -----
    Positions are lower-left corners of the oriented footprint in µm.  Hand moves of macros
    snap to the placement grid (``design.grid_origin + k * design.grid_pitch``, rounding to
    nearest as :func:`floorwidget.design.snap` does) and are clamped so the footprint stays
    inside the core (halos are not included in the clamp).  Clusters and cells are clamped
    but not snapped; I/O terminals are clamped to the die.

    Examples
    --------
    >>> s = Session(design)                                 # doctest: +SKIP
    >>> s.move("ram0", 120.0, 80.0); s.pin("ram0")          # doctest: +SKIP
    >>> s.place(seed=1); s.snapshot("first")                # doctest: +SKIP
    >>> print(s.compare("first", "current"))                # doctest: +SKIP
    """

    def __init__(self, design: Design, floorplan: Floorplan | None = None, *,
                 target_density: float = 0.8, clustered: bool | None = None):
        if not isinstance(design, Design):
            raise TypeError(f"Session needs a Design, got {type(design).__name__}")
        fp = design.initial if floorplan is None else floorplan
        if not isinstance(fp, Floorplan):
            raise TypeError(f"Session needs a Floorplan, got {type(fp).__name__}")
        if not design.same_netlist(fp.design):
            raise DesignError("the floorplan belongs to another design "
                              f"({fp.design.name!r}, not {design.name!r})")
        if fp.design is not design:
            fp = Floorplan(design, fp.x, fp.y, fp.orient, fp.status, fp.info)
        td = checks.density(target_density)
        if clustered is None:
            clustered = is_large(design, fp)
        self._adopt(SessionState.start(design, fp, td, bool(clustered)))

    def _adopt(self, state: SessionState) -> None:
        """Take ``state`` as this session's (a new session, or one read from a file)."""
        self.full_design = state.full_design
        self.clustering = state.clustering
        self.target_density = state.target_density
        self.progress: Callable | None = None
        self._full_floorplan = freeze(state.full_initial)
        self._expanded: tuple[int, Floorplan] | None = None
        self._base = state.base  # as read: session files store constraints relative to it
        self._initial = freeze(state.initial)
        self._history = History(state.current, state.undo, state.redo, state.log,
                                state.state_id)
        self._alts: dict[str, Alternative] = {a.label: a for a in state.alternatives}
        self._observers: list[Callable[[ChangeEvent], Any]] = []
        self._reports: OrderedDict[int, dict] = OrderedDict()
        self._lock = threading.RLock()
        # what a local refine compares with: the last placer result, else the floorplan the
        # session started from (a placed input is a placement too)
        self._placed: Floorplan | None = state.current

    @classmethod
    def from_state(cls, state: SessionState) -> Session:
        """A session in ``state`` (e.g. read by :func:`floorwidget.session.files.load_state`)."""
        s = cls.__new__(cls)
        s._adopt(state)
        return s

    @locked
    def state(self) -> SessionState:
        """This session as plain data (what :meth:`save` writes and :meth:`script` replays).

        The floorplans are the session's own read-only ones; the lists are copies, their
        entries (log entries, steps, alternatives) shared: treat them as read-only.
        """
        h = self._history
        if h.batches:
            raise DesignError(f"the session is in the middle of a batch ({h.batches[-1].label!r})")
        return SessionState(self.full_design, self._full_floorplan, self.clustering, self._base,
                            self.target_density, self._initial, h.fp, list(self._alts.values()),
                            list(h.log), list(h.undo), list(h.redo), h.state_id)

    # --- state ---------------------------------------------------------------------------------
    @property
    def _fp(self) -> Floorplan:
        return self._history.fp

    @property
    def _undo(self) -> list:
        return self._history.undo

    @property
    def design(self) -> Design:
        """The design with the constraints in force now (``floorplan.design``).

        Blockages, halos and cell regions are edited through the session
        (:meth:`add_blockage`, :meth:`set_halo`, :meth:`add_region`, ...): each edit derives a
        new :class:`Design` sharing the netlist (:meth:`Design.derive`), so this object
        changes with them, and with undo and redo."""
        return self._fp.design

    @property
    def floorplan(self) -> Floorplan:
        """The current floorplan (read-only arrays; ``.copy()`` it to edit outside the session)."""
        return self._fp

    @property
    def initial(self) -> Floorplan:
        """The floorplan the session started from (read-only)."""
        return self._initial

    @property
    def clustered(self) -> bool:
        """Whether the session edits the clustered version of its design."""
        return self.clustering is not None

    @property
    def expanded(self) -> Floorplan | None:
        """The full design's floorplan from the last :meth:`expand`, when it was made from the
        current floorplan (``None`` otherwise, and always for a flat session)."""
        e = self._expanded
        return e[1] if e is not None and e[0] == self._history.state_id else None

    def expand(self, *, target_density: float | None = None, seed: int = 0,
               progress: Callable | None = None, wait: bool = True, **options):
        """Place every cell of the full design around the current floorplan of the clusters
        (:func:`floorwidget.placer.expand`): macros, pinned and fixed blocks stay exactly where
        they are here; the cells are uncoarsened level by level and put on rows.

        The session's own floorplan does not change (nothing to undo); the result is
        :attr:`expanded` and is returned.  ``wait=False`` runs it in a background thread and
        returns a :class:`concurrent.futures.Future` at once (the notebook stays free).
        ``progress(stage, fraction, info)`` as for :meth:`place`.

        Raises
        ------
        DesignError
            For a flat session (its floorplan already holds every cell).
        """
        if self.clustering is None:
            raise DesignError(f"session of {self.design.name!r} is not clustered; its "
                              "floorplan already places every block")
        from ..placer.multilevel import expand as _expand  # noqa: PLC0415
        opts = self._run_options(target_density, seed, options)
        opts = {k: checks.plain(v, f"expand option {k!r}") for k, v in opts.items()}
        with self._lock:
            fp, sid = self._fp, self._history.state_id
        prog = progress or self.progress

        def run() -> Floorplan:
            full = _expand(self.clustering, fp, self._full_floorplan, progress=prog, **opts)
            with self._lock:
                self._expanded = (sid, full)
            return full

        return run() if wait else pool("expand", 1).submit(run)

    @property
    def report(self) -> dict:
        """:func:`floorwidget.metrics.evaluate` of the current floorplan (cached per state).

        Early-floorplanning estimates, not sign-off figures.
        """
        return dict(self._report_for(self._history.state_id, self._fp))

    def _report_for(self, state_id: int, fp: Floorplan) -> dict:
        with self._lock:
            rep = self._reports.get(state_id)
            if rep is not None:
                self._reports.move_to_end(state_id)
                return rep
        from ..metrics import evaluate  # noqa: PLC0415
        rep = dict(evaluate(fp.design, fp, target_density=self.target_density))
        with self._lock:  # computed outside the lock: a background report blocks no edit
            self._reports[state_id] = rep
            while len(self._reports) > _REPORT_CACHE:
                self._reports.popitem(last=False)
        return rep

    def report_now(self) -> tuple[dict, bool]:
        """The figures of the current floorplan that are ready at once: the whole
        :attr:`report` when it is known for this state, else
        :func:`floorwidget.metrics.quick_figures` (the keys
        :data:`~floorwidget.metrics.QUICK_KEYS`, equal to the report's).

        Returns
        -------
        (dict, bool)
            The figures, and whether they are the whole report.
        """
        with self._lock:
            sid, fp = self._history.state_id, self._fp
            rep = self._reports.get(sid)
        if rep is not None:
            return dict(rep), True
        from ..metrics import quick_figures  # noqa: PLC0415
        return quick_figures(fp.design, fp, target_density=self.target_density), False

    def report_later(self, executor: Executor | None = None) -> Future:
        """The whole :attr:`report` of the current state, computed on ``executor`` (default the
        package's ``"report"`` pool, one worker) and cached like :attr:`report`.

        The future's result is the report, or ``None`` when the session had moved to another
        state before the work began (a newer edit has its own report to wait for).
        """
        with self._lock:
            sid, fp = self._history.state_id, self._fp

        def run() -> dict | None:
            if self._history.state_id != sid:
                return None
            return dict(self._report_for(sid, fp))

        return (executor or pool("report", 1)).submit(run)

    @property
    def can_undo(self) -> bool:
        return bool(self._history.undo) and not self._history.batches

    @property
    def can_redo(self) -> bool:
        return bool(self._history.redo) and not self._history.batches

    @property
    def history(self) -> list[str]:
        """Action names of the undoable steps, oldest first."""
        return [s.action for s in self._history.undo]

    @property
    def log(self) -> list[dict]:
        """The action log (a deep copy): ``{"op": name, "args": [...], "kwargs": {...}}`` entries;
        a batch is ``{"op": "batch", "label": ..., "actions": [...]}``."""
        return _copy_log(self._history.log)

    # --- observers -----------------------------------------------------------------------------
    def on_change(self, callback: Callable[[ChangeEvent], Any]) -> Callable[[], None]:
        """Call ``callback(event)`` after every successful change, undo and redo.

        Inside a :meth:`batch` the events are held back and one event (``action`` = the batch
        label) is sent when the batch ends successfully; a rolled-back batch sends none.
        An observer that raises is reported as a warning and does not undo the change.

        Returns
        -------
        callable
            Call it (no arguments) to unsubscribe.
        """
        if not callable(callback):
            raise TypeError("on_change needs a callable")
        self._observers.append(callback)

        def remove() -> None:
            with contextlib.suppress(ValueError):
                self._observers.remove(callback)

        return remove

    def _emit(self, action: str, blocks, label: str | None = None) -> None:
        if self._history.batches:
            self._history.touch(blocks)
            return
        ev = ChangeEvent(action, None if blocks is None
                         else np.unique(np.asarray(blocks, np.int64)), self._fp, label)
        for cb in list(self._observers):
            try:
                cb(ev)
            except Exception as e:  # noqa: BLE001 - an observer must not break the session
                warnings.warn(f"session observer {cb!r} failed on {action!r}: {e!r}",
                              RuntimeWarning, stacklevel=3)

    # --- the commit path -----------------------------------------------------------------------
    def _record(self, op: str, args: Sequence = (), kwargs: Mapping | None = None) -> None:
        if op not in ACTIONS:  # the table is the one list of what a log may hold
            raise AssertionError(f"action {op!r} is not in the action table")
        self._history.record({"op": op, "args": list(args), "kwargs": dict(kwargs or {})})

    def _commit(self, action: str, new: Floorplan, *, log: tuple | None = None,
                label: str | None = None, blocks=None, join: bool = False) -> np.ndarray:
        """Make ``new`` current as one undoable step, log it and notify; returns changed idx.
        With ``join``, the step and log entry become part of the last ones
        (:meth:`History.join_last`) before the observers hear of it."""
        h = self._history
        steps = len(h.undo)
        idx = h.commit(action, new, blocks)
        if log is not None:
            self._record(action, *log)
        if join:
            h.join_last(step=len(h.undo) == steps + 1)
        self._emit(action, idx if blocks is None else blocks, label)
        return idx

    # --- undo / redo ---------------------------------------------------------------------------
    @locked
    def undo(self) -> None:
        """Undo the last step (a batch counts as one).  ``DesignError`` when there is none."""
        self._step(forward=False)

    @locked
    def redo(self) -> None:
        """Redo the last undone step.  ``DesignError`` when there is none."""
        self._step(forward=True)

    def _step(self, forward: bool) -> None:
        action = "redo" if forward else "undo"
        step = self._history.step(forward)
        self._record(action)
        self._emit(action, step.idx)

    # --- batches -------------------------------------------------------------------------------
    @contextlib.contextmanager
    def batch(self, label: str = "batch") -> Iterator[Session]:
        """Group calls into one undoable step, one log group and one change event.

        If the block raises, everything done inside is rolled back (floorplan, history,
        alternatives, log) and the exception propagates.  Batches may nest; an inner batch
        becomes part of the outer one.

        Examples
        --------
        >>> with s.batch("drag ram0"):                       # doctest: +SKIP
        ...     s.move("ram0", 300, 200); s.pin("ram0"); s.refine()
        """
        label = str(label)
        with self._lock:
            b = self._history.begin(label, saved=dict(self._alts))
            ok = False
            try:
                yield self
                ok = True
            finally:
                if not ok:
                    self._alts = b.saved
                outermost = self._history.end(b, ok)
            if outermost:
                self._emit(label, None if b.blocks is None else sorted(b.blocks))

    # --- alternatives --------------------------------------------------------------------------
    def _check_label(self, label) -> str:
        if not isinstance(label, str) or not label.strip():
            raise DesignError(f"an alternative needs a non-empty text label, got {label!r}")
        if label in ("current", "initial"):
            raise DesignError(f"{label!r} is reserved (it names the {label} floorplan)")
        if label in self._alts:
            raise DesignError(f"there is already an alternative labelled {label!r}")
        return label

    @locked
    def snapshot(self, label: str, note: str = "") -> Alternative:
        """Keep the current floorplan and its report as alternative ``label`` (unique)."""
        label = self._check_label(label)
        fp = self._fp
        alt = Alternative(label, fp, dict(self._report_for(self._history.state_id, fp)),
                          str(note), now(), None)
        self._alts[label] = alt
        self._record("snapshot", (label,), {"note": str(note)} if note else {})
        self._emit("snapshot", [], label)
        return alt

    @locked
    def add_alternative(self, label: str, floorplan: Floorplan, note: str = "",
                        params: Mapping[str, Any] | None = None,
                        report: Mapping[str, Any] | None = None) -> Alternative:
        """Keep an outside floorplan of the same design (e.g. a sweep result) as ``label``.

        It takes the constraints (blockages, halos) in force now.  ``report`` may be given
        when already computed (it is otherwise evaluated here).
        """
        label = self._check_label(label)
        if not isinstance(floorplan, Floorplan) or not self.design.same_netlist(
                floorplan.design):
            raise DesignError(f"alternative {label!r}: not a floorplan of design "
                              f"{self.design.name!r}")
        k = checks.fixed_freed(self._base, floorplan.status)
        if k is not None:
            raise DesignError(f"alternative {label!r}: block {self.design.names[k]!r} is FIXED "
                              "in the design; a floorplan that frees it cannot be kept")
        fp = freeze(Floorplan(self.design, floorplan.x, floorplan.y, floorplan.orient,
                              floorplan.status, floorplan.info))
        if report is None:
            from ..metrics import evaluate  # noqa: PLC0415
            report = evaluate(self.design, fp, target_density=self.target_density)
        params = None if params is None else checks.plain(dict(params), "params")
        alt = Alternative(label, fp, dict(report), str(note), now(), params)
        self._alts[label] = alt
        kw: dict[str, Any] = {}
        if note:
            kw["note"] = str(note)
        if params is not None:
            kw["params"] = params
        self._record("add_alternative", (label, fp), kw)
        self._emit("add_alternative", [], label)
        return alt

    @property
    def alternatives(self) -> list[Alternative]:
        """The kept alternatives, oldest first (label, floorplan, report, note, time, params)."""
        return list(self._alts.values())

    def alternative(self, label: str) -> Alternative:
        """The alternative ``label`` (:class:`DesignError` naming it when unknown)."""
        alt = self._alts.get(label) if isinstance(label, str) else None
        if alt is None:
            known = ", ".join(map(repr, self._alts)) or "none"
            raise DesignError(f"no alternative labelled {label!r} (known: {known})",
                              where=f"alternative {label!r}")
        return alt

    @locked
    def restore(self, label: str) -> None:
        """Make alternative ``label`` the current floorplan (an undoable step), with the
        constraints (blockages, halos) it was kept with."""
        alt = self.alternative(label)
        self._commit("restore", alt.floorplan.copy(), log=((label,),), label=label)

    # --- comparison ----------------------------------------------------------------------------
    def _resolve(self, which) -> tuple[str, Floorplan, dict]:
        if isinstance(which, Floorplan):
            if not self.design.same_netlist(which.design):
                raise DesignError("compare: the floorplan belongs to another design")
            from ..metrics import evaluate  # noqa: PLC0415
            return "floorplan", which, dict(evaluate(which.design, which,
                                                     target_density=self.target_density))
        if which == "current":
            return "current", self._fp, self.report
        if which == "initial":
            return "initial", self._initial, self._report_for(0, self._initial)
        alt = self.alternative(which)
        return alt.label, alt.floorplan, dict(alt.report)

    def compare(self, a="initial", b="current") -> Comparison:
        """Differences from ``a`` to ``b``: metric deltas (b − a) and changed macros.

        Parameters
        ----------
        a, b : str or Floorplan
            An alternative label, ``"current"``, ``"initial"``, or a Floorplan of this design.

        Returns
        -------
        Comparison
            Prints as a table; see its attributes.
        """
        la, fa, ra = self._resolve(a)
        lb, fb, rb = self._resolve(b)
        return Comparison.of(self.design, la, fa, ra, lb, fb, rb)

    # --- record --------------------------------------------------------------------------------
    def script(self) -> str:
        """Plain Python that rebuilds this session in a fresh interpreter.

        It loads the design from ``design.source`` (absolute path), creates
        ``session = fw.Session(design, ...)`` and replays every logged action (placer calls with
        their seed and every option), ending with the replayed session bound to ``session``.
        The replayed floorplan is bit-identical (floats are written with ``repr``).  Every
        action is checked against the action table first and written from plain values only.

        Raises
        ------
        DesignError
            When the design was not loaded from a file (no ``design.source``): the script could
            not load it.  Save the design first (``fw.save``) and load it back.
        """
        from .script import script_text  # noqa: PLC0415
        return script_text(self.state())

    def save(self, path) -> None:
        """Write the session (design reference, floorplans, alternatives, log, history) as
        versioned JSON, atomically: the file is either the complete new one or untouched."""
        from .files import save_state  # noqa: PLC0415
        try:
            state = self.state()
        except DesignError as e:
            raise DesignError(f"cannot save a session: {e.message}", file=str(path)) from None
        save_state(state, path)

    @classmethod
    def load(cls, path, design: Design | None = None) -> Session:
        """Read a session file written by :meth:`save`.

        Parameters
        ----------
        path : path-like
        design : Design, optional
            The design, when already loaded (else it is loaded from the recorded source).

        Raises
        ------
        DesignError
            A damaged or mismatching file, naming it (and the JSON path or line); also a file
            whose log holds an action or keyword the action table does not know, or that frees
            or moves a block FIXED in the design file.
        """
        from .files import load_state  # noqa: PLC0415
        return cls.from_state(load_state(path, design))

    def __repr__(self) -> str:
        h = self._history
        return (f"<Session of {self.design.name!r}: {len(h.undo)} undo, "
                f"{len(h.redo)} redo, {len(self._alts)} alternatives>")
