"""The one door for changes to a floorplan: history, alternatives and a replayable record.

A :class:`Session` owns the *current* :class:`~floorwidget.design.Floorplan` of one design.
Every change — a hand move, pin, rotation or flip, a placer run, restoring an alternative —
goes through one of its methods, which

* validates the request and raises a clear one-line error (``KeyError`` for an unknown name,
  :class:`~floorwidget.design.DesignError` for a forbidden change,
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
"""

from __future__ import annotations

import contextlib
import datetime as _dt
import math
import os
import threading
import warnings
from collections import OrderedDict
from collections.abc import Callable, Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from . import arrange
from ._threads import pool
from .design import (
    CELL,
    CLUSTER,
    FIXED,
    MACRO,
    MOVABLE,
    ORIENTATIONS,
    PINNED,
    REGION_TYPES,
    STATUS_NAMES,
    TERMINAL,
    CellRegions,
    Design,
    DesignError,
    Floorplan,
    orient_offsets,
    orient_size,
)
from .design import snap as _snap

__all__ = ["ChangeEvent", "Comparison", "Alternative", "Session", "SESSION_FORMAT",
           "SESSION_VERSION"]

SESSION_FORMAT = "floorwidget-session"
SESSION_VERSION = 1

_REPORT_CACHE = 32  # reports kept for recently visited states (undo/redo hits them)


# ---------------------------------------------------------------------------------------------
# small value types


@dataclass(frozen=True)
class ChangeEvent:
    """What an observer registered with :meth:`Session.on_change` receives.

    Attributes
    ----------
    action : str
        ``"move"``, ``"pin"``, ``"unpin"``, ``"rotate"``, ``"flip"``, ``"set_orientation"``,
        ``"align"``, ``"distribute"``, ``"array"``, ``"mirror"``, ``"push"``, ``"shift"``,
        ``"add_blockage"``, ``"move_blockage"``, ``"remove_blockage"``,
        ``"set_blockage_density"``, ``"set_halo"``, ``"add_region"``, ``"remove_region"``,
        ``"assign_group"``, ``"place"``, ``"refine"``, ``"legalize"``,
        ``"restore"``, ``"undo"``, ``"redo"``,
        ``"snapshot"``, ``"add_alternative"``, or the label of a :meth:`Session.batch`.
    blocks : ndarray of int or None
        Indices of the blocks whose position, orientation or status may have changed
        (sorted); ``None`` means "assume all"; an empty array means none did (e.g. a snapshot).
    floorplan : Floorplan
        The new current floorplan (read-only).  ``floorplan.design`` carries the constraints
        in force (blockages, halos, cell regions); it is another object after a constraint
        edit.
    label : str or None
        The snapshot / alternative label for ``snapshot``, ``add_alternative`` and ``restore``.
    """

    action: str
    blocks: np.ndarray | None
    floorplan: Floorplan
    label: str | None = None


@dataclass(frozen=True)
class Alternative:
    """A named floorplan kept by :meth:`Session.snapshot` or :meth:`Session.add_alternative`."""

    label: str
    floorplan: Floorplan
    report: Mapping[str, Any]
    note: str = ""
    time: str = ""
    params: Mapping[str, Any] | None = None


@dataclass
class _Step:
    """One undoable step: the changed blocks with their old and new values (bit-exact), and
    the designs before and after when the step edited constraints (``None`` otherwise)."""

    action: str
    idx: np.ndarray
    old: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]
    new: tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]
    old_info: dict
    new_info: dict
    old_id: int
    new_id: int
    old_design: Design | None = None
    new_design: Design | None = None


@dataclass
class _Batch:
    label: str
    start_fp: Floorplan
    start_id: int
    start_alts: dict
    start_redo: list
    log: list = field(default_factory=list)
    blocks: set | None = field(default_factory=set)


# ---------------------------------------------------------------------------------------------
# helpers


def _freeze(fp: Floorplan) -> Floorplan:
    for a in (fp.x, fp.y, fp.orient, fp.status):
        a.flags.writeable = False
    return fp


def _bits_differ(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Element-wise "not bit-identical" (``-0.0`` differs from ``0.0``; NaN equals itself)."""
    if a.dtype == np.float64:
        return a.view(np.int64) != b.view(np.int64)
    return a != b


def _changed(a: Floorplan, b: Floorplan) -> np.ndarray:
    return np.flatnonzero(_bits_differ(a.x, b.x) | _bits_differ(a.y, b.y)
                          | (a.orient != b.orient) | (a.status != b.status))


def _orient_matrix(code: int) -> np.ndarray:
    ax, ay = orient_offsets(1.0, 0.0, code)
    bx, by = orient_offsets(0.0, 1.0, code)
    return np.array([[float(ax), float(bx)], [float(ay), float(by)]])


_MATS = [_orient_matrix(c) for c in range(8)]
_R90 = _MATS[ORIENTATIONS.index("W")]  # counter-clockwise quarter turn
_MY = _MATS[ORIENTATIONS.index("FN")]  # mirror about the vertical axis


def _code_of(m: np.ndarray) -> int:
    for c, mc in enumerate(_MATS):
        if np.array_equal(mc, m):
            return c
    raise AssertionError("not an orientation matrix")  # pragma: no cover


def _fallback_rotated(code: int, allowed: int) -> int | None:
    m = _MATS[code]
    for _ in range(3):
        m = _R90 @ m
        c = _code_of(m)
        if allowed >> c & 1:
            return c
    return None


def _fallback_flipped(code: int, allowed: int) -> int | None:
    c = _code_of(_MY @ _MATS[code])
    return c if allowed >> c & 1 else None


def _next_orientation(kind: str, code: int, allowed: int) -> int | None:
    """Rotate (90° counter-clockwise, skipping disallowed) or flip ``code`` among ``allowed``.

    Uses :mod:`floorwidget.placer.orient` when it is available, else a local equivalent built
    on :func:`~floorwidget.design.orient_offsets`.
    """
    try:
        from .placer import orient as _orient  # noqa: PLC0415
        fn = getattr(_orient, "rotated" if kind == "rotate" else "flipped")
    except Exception:  # noqa: BLE001 - the placer package may not have landed yet
        fn = None
    if fn is not None:
        try:
            c = fn(code, allowed)
        except TypeError:
            c = None
            fn = None
        if fn is not None:
            if c is None:
                return None
            c = int(c)
            return c if (allowed >> c & 1) and c != code else None
    local = _fallback_rotated if kind == "rotate" else _fallback_flipped
    c = local(code, allowed)
    return None if c is None or c == code else c


def _locked(method):
    """Run ``method`` holding the session's re-entrant lock (one change at a time)."""
    import functools  # noqa: PLC0415

    @functools.wraps(method)
    def wrapper(self, *args, **kwargs):
        with self._lock:
            return method(self, *args, **kwargs)

    return wrapper


def _finite(v, what: str) -> float:
    if isinstance(v, bool):
        raise DesignError(f"{what} must be a number, got {v!r}")
    try:
        f = float(v)
    except (TypeError, ValueError):
        raise DesignError(f"{what} must be a number, got {v!r}") from None
    if not math.isfinite(f):
        raise DesignError(f"{what} must be finite, got {v!r}")
    return f


def _density(v) -> float:
    """A target density: a number in (0, 1] (what the placer and the report take)."""
    f = _finite(v, "target_density")
    if not 0.0 < f <= 1.0:
        raise DesignError(f"target_density must lie in (0, 1], got {v!r}")
    return f


def _clamp_to_grid(v: float, size: float, lo: float, hi: float, origin: float,
                   pitch: float) -> float:
    """Nearest grid point ``origin + k*pitch`` to ``v`` with ``[p, p+size]`` inside ``[lo, hi]``.

    Inside the range this is exactly :func:`floorwidget.design.snap`; a request outside is
    clamped to the first/last grid point that still fits (the lower edge when none fits).
    """
    k = np.round((v - origin) / pitch)
    eps = 1e-9
    k_lo = math.ceil((lo - origin) / pitch - eps)
    k_hi = math.floor((hi - size - origin) / pitch + eps)
    if k_hi < k_lo:
        k_hi = k_lo
    if k < k_lo:
        k = float(k_lo)
    elif k > k_hi:
        k = float(k_hi)
    if k == np.round((v - origin) / pitch):
        return float(_snap(v, origin, pitch))  # inside the range: exactly design.snap
    return float(origin + k * pitch)


def _clamp(v: float, size: float, lo: float, hi: float) -> float:
    return float(min(max(v, lo), max(lo, hi - size)))


#: A clustered session keeps coarsening while its clustered netlist has more pins than this
#: (a refine on it costs about 0.3 s per 700,000 pins: DEVELOPERS.md).
SESSION_MAX_PINS = 1_000_000


def _large(design: Design, fp: Floorplan) -> bool:
    """Whether a session works on the clusters: where ``place`` would go multilevel
    (:func:`floorwidget.placer.flow.use_multilevel`; a flat refine takes seconds there)."""
    from .placer.flow import use_multilevel  # noqa: PLC0415
    return use_multilevel(design, fp, "auto")


def _now() -> str:
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


# ---------------------------------------------------------------------------------------------


class Session:
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
        if not design.same_netlist(fp.design):
            raise DesignError("the floorplan belongs to another design "
                              f"({fp.design.name!r}, not {design.name!r})")
        if fp.design is not design:
            fp = Floorplan(design, fp.x, fp.y, fp.orient, fp.status, fp.info)
        self.full_design = design
        self.clustering = None
        self._full_floorplan = _freeze(fp.copy())
        self._expanded: tuple[int, Floorplan] | None = None
        if clustered is None:
            clustered = _large(design, fp)
        if clustered:
            from .placer.coarsen import coarsen  # noqa: PLC0415
            from .placer.multilevel import top_blocks  # noqa: PLC0415
            self.clustering = coarsen(design, fp, target_blocks=top_blocks(design), seed=0,
                                      max_pins=SESSION_MAX_PINS)
            design = self.clustering.coarsest
            fp = design.initial
        self.target_density = _density(target_density)
        self.progress: Callable | None = None
        self._initial = _freeze(fp.copy())
        self._fp = self._initial
        self._next_id = 1
        self._state_id = 0
        self._undo: list[_Step] = []
        self._redo: list[_Step] = []
        self._alts: dict[str, Alternative] = {}
        self._log: list[dict] = []
        self._observers: list[Callable[[ChangeEvent], Any]] = []
        self._reports: OrderedDict[int, dict] = OrderedDict()
        self._batches: list[_Batch] = []
        self._base = design  # as read: session files store constraints relative to it
        self._source = os.path.abspath(design.source) if design.source else None
        self._lef = [os.path.abspath(p) for p in self.full_design.lef_files]
        self._lock = threading.RLock()

    # --- state ---------------------------------------------------------------------------------
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
        return e[1] if e is not None and e[0] == self._state_id else None

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
        from .placer.multilevel import expand as _expand  # noqa: PLC0415
        opts = {"target_density": self.target_density if target_density is None
                else _density(target_density), "seed": int(seed), **options}
        opts = {k: _plain(v, f"expand option {k!r}") for k, v in opts.items()}
        with self._lock:
            fp, sid = self._fp, self._state_id
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
        return dict(self._report_for(self._state_id, self._fp))

    def _report_for(self, state_id: int, fp: Floorplan) -> dict:
        rep = self._reports.get(state_id)
        if rep is None:
            from .metrics import evaluate  # noqa: PLC0415
            rep = dict(evaluate(fp.design, fp, target_density=self.target_density))
            self._reports[state_id] = rep
            while len(self._reports) > _REPORT_CACHE:
                self._reports.popitem(last=False)
        else:
            self._reports.move_to_end(state_id)
        return rep

    @property
    def can_undo(self) -> bool:
        return bool(self._undo) and not self._batches

    @property
    def can_redo(self) -> bool:
        return bool(self._redo) and not self._batches

    @property
    def history(self) -> list[str]:
        """Action names of the undoable steps, oldest first."""
        return [s.action for s in self._undo]

    @property
    def log(self) -> list[dict]:
        """The action log (a deep copy): ``{"op": name, "args": [...], "kwargs": {...}}`` entries;
        a batch is ``{"op": "batch", "label": ..., "actions": [...]}``."""
        return _copy_log(self._log)

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
        if self._batches:
            b = self._batches[-1]
            if blocks is None or b.blocks is None:
                b.blocks = None
            else:
                b.blocks.update(int(i) for i in np.asarray(blocks).ravel())
            return
        ev = ChangeEvent(action, None if blocks is None else np.unique(np.asarray(blocks,
                                                                                  np.int64)),
                         self._fp, label)
        for cb in list(self._observers):
            try:
                cb(ev)
            except Exception as e:  # noqa: BLE001 - an observer must not break the session
                warnings.warn(f"session observer {cb!r} failed on {action!r}: {e!r}",
                              RuntimeWarning, stacklevel=3)

    # --- the commit path -----------------------------------------------------------------------
    def _record(self, op: str, args: Sequence = (), kwargs: Mapping | None = None) -> None:
        entry = {"op": op, "args": list(args), "kwargs": dict(kwargs or {})}
        (self._batches[-1].log if self._batches else self._log).append(entry)

    def _commit(self, action: str, new: Floorplan, *, log: tuple | None = None,
                label: str | None = None, blocks=None) -> np.ndarray:
        """Make ``new`` current as one undoable step, log it and notify; returns changed idx."""
        old = self._fp
        redesign = new.design is not old.design
        if blocks is not None and new.info == old.info:
            # hand edits name the blocks they touch: diff only those (O(k), not O(n))
            b = np.unique(np.asarray(blocks, dtype=np.int64))
            sub = (_bits_differ(old.x[b], new.x[b]) | _bits_differ(old.y[b], new.y[b])
                   | (old.orient[b] != new.orient[b]) | (old.status[b] != new.status[b]))
            idx = b[sub]
        else:
            idx = _changed(old, new)
        new = _freeze(new)
        if not len(idx) and not redesign and old.info != new.info:
            # only the facts in .info changed (e.g. a placer run that moved nothing): take
            # them, but make no undo step that would look like it did nothing
            self._fp = new
        elif len(idx) or redesign:
            nid = self._next_id
            self._next_id += 1
            step = _Step(action, idx,
                         (old.x[idx].copy(), old.y[idx].copy(), old.orient[idx].copy(),
                          old.status[idx].copy()),
                         (new.x[idx].copy(), new.y[idx].copy(), new.orient[idx].copy(),
                          new.status[idx].copy()),
                         dict(old.info), dict(new.info), self._state_id, nid,
                         *((old.design, new.design) if redesign else ()))
            if not self._batches:
                self._undo.append(step)
            self._redo.clear()
            self._fp = new
            self._state_id = nid
        if log is not None:
            self._record(action, *log)
        self._emit(action, idx if blocks is None else blocks, label)
        return idx

    def _apply(self, step: _Step, forward: bool) -> None:
        vals, info, sid = ((step.new, step.new_info, step.new_id) if forward
                           else (step.old, step.old_info, step.old_id))
        fp = self._fp.copy()
        design = step.new_design if forward else step.old_design
        if design is not None:
            fp = Floorplan(design, fp.x, fp.y, fp.orient, fp.status)
        i = step.idx
        fp.x[i], fp.y[i], fp.orient[i], fp.status[i] = vals
        fp.info = dict(info)
        self._fp = _freeze(fp)
        self._state_id = sid

    def _no_batch(self, what: str) -> None:
        if self._batches:
            raise DesignError(f"{what} is not allowed inside a batch "
                              f"({self._batches[-1].label!r})")

    # --- hand edits ----------------------------------------------------------------------------
    def _movable_index(self, name: str, verb: str) -> int:
        if not isinstance(name, str):
            raise KeyError(f"block names are strings, got {name!r}")
        i = self.design.block(name)
        if self._fp.status[i] == FIXED:
            raise DesignError(f"block {name!r} is fixed by the input and cannot be {verb}")
        return i

    def _fit(self, i: int, x: float, y: float, orient: int) -> tuple[float, float]:
        d = self.design
        w, h = orient_size(d.width[i], d.height[i], orient)
        w, h = float(w), float(h)
        if d.kind[i] == TERMINAL:
            box = d.die
            return _clamp(x, w, box[0], box[2]), _clamp(y, h, box[1], box[3])
        box = d.core
        if d.kind[i] == MACRO:
            (ox, oy), (px, py) = d.grid_origin, d.grid_pitch
            return (_clamp_to_grid(x, w, box[0], box[2], float(ox), float(px)),
                    _clamp_to_grid(y, h, box[1], box[3], float(oy), float(py)))
        return _clamp(x, w, box[0], box[2]), _clamp(y, h, box[1], box[3])

    @_locked
    def move(self, name: str, x: float, y: float) -> tuple[float, float]:
        """Move block ``name`` so its lower-left corner is near ``(x, y)`` µm.

        Macros snap to the placement grid; every block is clamped inside the core (terminals
        inside the die).  A pinned block may be moved by hand and stays pinned; a fixed one
        may not.

        Parameters
        ----------
        name : str
            Block name.
        x, y : float
            Requested lower-left corner, µm.

        Returns
        -------
        (float, float)
            The position actually taken (after snapping and clamping).

        Raises
        ------
        KeyError
            Unknown block.
        DesignError
            A fixed block, or a non-finite coordinate.
        """
        i = self._movable_index(name, "moved")
        fx, fy = _finite(x, "x"), _finite(y, "y")
        nx, ny = self._fit(i, fx, fy, int(self._fp.orient[i]))
        new = self._fp.copy()
        new.x[i], new.y[i] = nx, ny
        self._commit("move", new, log=((name, fx, fy),), blocks=[i])
        return nx, ny

    def _names(self, names) -> list[str]:
        if isinstance(names, str):
            return [names]
        out = list(names)
        for nm in out:
            if not isinstance(nm, str):
                raise KeyError(f"block names are strings, got {nm!r}")
        return out

    def _set_status(self, action: str, names, status: int) -> None:
        lst = self._names(names)
        idx = np.array([self._movable_index(nm, action + "ned") for nm in lst], dtype=np.int64)
        new = self._fp.copy()
        new.status[idx] = status
        self._commit(action, new, log=((names if isinstance(names, str) else lst,),),
                     blocks=idx)

    @_locked
    def pin(self, names: str | Iterable[str]) -> None:
        """Pin block(s): placers will not move them (hand moves still can).

        Raises ``KeyError`` for an unknown name and :class:`DesignError` for a fixed block;
        nothing is pinned then.
        """
        self._set_status("pin", names, PINNED)

    @_locked
    def unpin(self, names: str | Iterable[str]) -> None:
        """Make pinned block(s) movable again (fixed blocks stay fixed: an error)."""
        self._set_status("unpin", names, MOVABLE)

    def _reorient(self, action: str, name: str) -> None:
        i = self._movable_index(name, "rotated" if action == "rotate" else "flipped")
        d, fp = self.design, self._fp
        cur = int(fp.orient[i])
        nxt = _next_orientation(action, cur, int(d.orient_allowed[i]))
        if nxt is None:
            allowed = ", ".join(d.allowed_orientations(name))
            what = "rotation" if action == "rotate" else "mirror image"
            raise DesignError(f"block {name!r} in {ORIENTATIONS[cur]} has no allowed "
                              f"{what} (allowed: {allowed})")
        w0, h0 = (float(v) for v in orient_size(d.width[i], d.height[i], cur))
        if action == "rotate":
            w1, h1 = (float(v) for v in orient_size(d.width[i], d.height[i], nxt))
            cx, cy = float(fp.x[i]) + w0 / 2, float(fp.y[i]) + h0 / 2
            x, y = cx - w1 / 2, cy - h1 / 2
            nx, ny = self._fit(i, x, y, nxt)
        else:  # same footprint, mirrored in place: the corner does not move (nor re-snap)
            nx, ny = float(fp.x[i]), float(fp.y[i])
        new = fp.copy()
        new.x[i], new.y[i], new.orient[i] = nx, ny, nxt
        self._commit(action, new, log=((name,),), blocks=[i])

    @_locked
    def rotate(self, name: str) -> None:
        """Turn a block 90° counter-clockwise to its next allowed orientation.

        The footprint centre is kept, then the corner is re-snapped and kept inside the core.
        Raises :class:`DesignError` when no other rotation is allowed or the block is fixed.
        """
        self._reorient("rotate", name)

    @_locked
    def flip(self, name: str) -> None:
        """Mirror a block about its vertical axis (N↔FN, S↔FS, E↔FE, W↔FW), in place.

        The footprint is unchanged, so the lower-left corner stays where it is.

        Raises :class:`DesignError` when the mirror image is not an allowed orientation.
        """
        self._reorient("flip", name)

    @_locked
    def set_orientation(self, name: str, orientation: str) -> tuple[float, float]:
        """Give a block the orientation ``orientation`` (``"N"``, ``"FS"``, ...) by name.

        Like :meth:`rotate`, the footprint centre is kept, then the corner is re-snapped and
        kept inside the core.  Returns the lower-left corner taken.

        Raises
        ------
        DesignError
            An unknown or disallowed orientation, or a fixed block.
        """
        i = self._movable_index(name, "turned")
        if orientation not in ORIENTATIONS:
            raise DesignError(f"orientation must be one of {', '.join(ORIENTATIONS)}; got "
                              f"{orientation!r}")
        d, fp = self.design, self._fp
        code = ORIENTATIONS.index(orientation)
        if not d.orient_allowed[i] >> code & 1:
            raise DesignError(f"block {name!r} does not allow {orientation} (allowed: "
                              f"{', '.join(d.allowed_orientations(name))})")
        cur = int(fp.orient[i])
        w0, h0 = (float(v) for v in orient_size(d.width[i], d.height[i], cur))
        w1, h1 = (float(v) for v in orient_size(d.width[i], d.height[i], code))
        nx, ny = float(fp.x[i]), float(fp.y[i])
        if code != cur:
            nx, ny = self._fit(i, nx + (w0 - w1) / 2, ny + (h0 - h1) / 2, code)
        new = fp.copy()
        new.x[i], new.y[i], new.orient[i] = nx, ny, code
        self._commit("set_orientation", new, log=((name, orientation),), blocks=[i])
        return nx, ny

    # --- arranging groups of macros (floorwidget.arrange does the geometry) -------------------
    def _arrange(self, op: str, names, fn: Callable, args: tuple, kwargs: dict | None = None):
        lst = self._names(names)
        idx = np.array([self.design.block(nm) for nm in lst], dtype=np.int64)
        kwargs = dict(kwargs or {})
        res = fn(self.design, self._fp, idx, *args, **kwargs)
        log_args = (lst, *(_plain(a, f"{op} argument") for a in args))
        log_kw = {k: _plain(v, f"{op} option {k!r}") for k, v in kwargs.items()
                  if v is not None}
        self._commit(op, res.apply(self._fp), log=(log_args, log_kw), blocks=idx)
        return res

    @_locked
    def align(self, names: Iterable[str], side: str):
        """Line up macros on one edge or centre line of their bounding box (one undo step).

        ``side``: ``"left"``, ``"right"``, ``"bottom"``, ``"top"``, ``"x_centre"`` or
        ``"y_centre"``; see :func:`floorwidget.arrange.align`.  Pinned and fixed macros are
        refused (nothing changes).  The result may be illegal; :attr:`report` says so.

        Returns
        -------
        floorwidget.arrange.Arranged
            The positions taken and notes on what was adjusted.
        """
        return self._arrange("align", names, arrange.align, (side,))

    @_locked
    def distribute(self, names: Iterable[str], axis: str = "x"):
        """Equal gaps between neighbouring macros along ``axis`` (``"x"`` or ``"y"``), the
        outer two staying; see :func:`floorwidget.arrange.distribute`."""
        return self._arrange("distribute", names, arrange.distribute, (axis,))

    @_locked
    def array(self, names: Iterable[str], rows: int, cols: int, pitch=None):
        """Pack macros into a ``rows × cols`` array, in the order given, bottom row first.

        ``pitch`` (µm, a number or ``(x, y)``) is the step between neighbouring cells; ``None``
        abuts them under the halo rule.  See :func:`floorwidget.arrange.array`.
        """
        return self._arrange("array", names, arrange.array, (rows, cols), {"pitch": pitch})

    @_locked
    def mirror(self, names: Iterable[str], axis: str = "x"):
        """Mirror a group about its centre: ``axis="x"`` swaps left and right, ``"y"`` top and
        bottom; orientations mirrored too.  See :func:`floorwidget.arrange.mirror`."""
        return self._arrange("mirror", names, arrange.mirror, (axis,))

    @_locked
    def push(self, names: Iterable[str], side: str | None = None):
        """Move a group as one to a core edge (``None``: the nearest) until it touches it.
        See :func:`floorwidget.arrange.push`."""
        return self._arrange("push", names, arrange.push, (), {"side": side})

    @_locked
    def shift(self, names: str | Iterable[str], dx: float, dy: float):
        """Move macros by ``(dx, dy)`` µm as one group, snapped, stopping at the core edge.

        A hand move like :meth:`move`: pinned macros may be shifted (they stay pinned), fixed
        ones may not.  See :func:`floorwidget.arrange.shift`.
        """
        return self._arrange("shift", names, arrange.shift,
                             (_finite(dx, "dx"), _finite(dy, "dy")))

    # --- constraints: placement blockages and halos ---------------------------------------------
    def _constrain(self, action: str, log: tuple, blocks=(), **changes) -> None:
        """Commit a design derived with ``changes`` as one undoable step (positions kept)."""
        fp = self._fp
        design = fp.design.derive(**changes)
        new = Floorplan(design, fp.x, fp.y, fp.orient, fp.status, fp.info)
        self._commit(action, new, log=log, blocks=np.asarray(blocks, dtype=np.int64))

    def _blockage_index(self, index) -> int:
        k = len(self.design.blockages)
        if isinstance(index, bool) or not isinstance(index, (int, np.integer)) \
                or not 0 <= int(index) < k:
            raise DesignError(f"blockage {index!r}: no such placement blockage (there are {k})")
        return int(index)

    def _rect_in_die(self, rect, what: str) -> list[float]:
        """``rect`` (two corners in any order) as ``[xlo, ylo, xhi, yhi]``, checked: four
        finite numbers, some area, inside the die (errors name ``what``)."""
        try:
            vals = list(rect)
        except TypeError:
            vals = []
        if len(vals) != 4:
            raise DesignError(f"{what}: a rectangle is four numbers [xlo, ylo, xhi, yhi], got "
                              f"{rect!r}")
        a, b, c, d = (_finite(v, what) for v in vals)
        r = [min(a, c), min(b, d), max(a, c), max(b, d)]
        if not (r[2] > r[0] and r[3] > r[1]):
            raise DesignError(f"{what}: rectangle {r} has no area")
        die = self.design.die
        if r[0] < die[0] or r[1] < die[1] or r[2] > die[2] or r[3] > die[3]:
            raise DesignError(f"{what}: rectangle {r} reaches outside the die {die.tolist()}")
        return r

    @staticmethod
    def _max_density(v, what: str) -> float:
        f = _finite(v, f"{what}: max_density")
        if not 0.0 <= f <= 1.0:
            raise DesignError(f"{what}: max_density must lie in [0, 1] (0: a full blockage), "
                              f"got {v!r}")
        return f

    @_locked
    def add_blockage(self, rect, max_density: float = 0.0) -> int:
        """Add a placement blockage over ``rect = [xlo, ylo, xhi, yhi]`` µm (one undo step).

        Parameters
        ----------
        rect : four numbers
            Two opposite corners (in any order), inside the die.
        max_density : float
            0 (default): a full blockage — no macro footprint and no standard cell on it.  A
            value in (0, 1]: a partial one, where cells and clusters fill at most this share
            of the area (DEF ``+ PARTIAL`` percentage ÷ 100); macros may sit on it.

        Returns
        -------
        int
            The new blockage's index (the last one).

        Raises
        ------
        DesignError
            A rectangle without area or outside the die, or a density outside [0, 1]; nothing
            changes.  The placer honours the blockage on the next :meth:`place` or
            :meth:`refine`; :attr:`report` counts macros on it at once.
        """
        k = len(self.design.blockages)
        r = self._rect_in_die(rect, f"blockage {k}")
        md = self._max_density(max_density, f"blockage {k}")
        d = self.design
        self._constrain("add_blockage", ((r,), {"max_density": md} if md else {}),
                        blockages=np.vstack([d.blockages, [r]]),
                        blockage_max_density=np.append(d.blockage_max_density, md))
        return k

    @_locked
    def move_blockage(self, index: int, x: float, y: float) -> tuple[float, float]:
        """Move blockage ``index`` so its lower-left corner is at ``(x, y)`` µm (size kept).

        Raises :class:`DesignError` when it would reach outside the die (nothing changes).
        Returns the corner taken.
        """
        k = self._blockage_index(index)
        d = self.design
        b = d.blockages[k]
        fx, fy = _finite(x, f"blockage {k}: x"), _finite(y, f"blockage {k}: y")
        r = self._rect_in_die([fx, fy, fx + (b[2] - b[0]), fy + (b[3] - b[1])],
                                f"blockage {k}")
        bl = d.blockages.copy()
        bl[k] = r
        self._constrain("move_blockage", ((k, fx, fy),), blockages=bl,
                        blockage_max_density=d.blockage_max_density)
        return r[0], r[1]

    @_locked
    def set_blockage_density(self, index: int, max_density: float) -> None:
        """Make blockage ``index`` full (``max_density=0``) or partial (in (0, 1])."""
        k = self._blockage_index(index)
        md = self._max_density(max_density, f"blockage {k}")
        dens = self.design.blockage_max_density.copy()
        dens[k] = md
        self._constrain("set_blockage_density", ((k, md),), blockage_max_density=dens)

    @_locked
    def remove_blockage(self, index: int) -> None:
        """Delete blockage ``index`` (later ones move down by one index)."""
        k = self._blockage_index(index)
        d = self.design
        self._constrain("remove_blockage", ((k,),), blockages=np.delete(d.blockages, k, axis=0),
                        blockage_max_density=np.delete(d.blockage_max_density, k))

    @_locked
    def set_halo(self, names: str | Iterable[str], halo) -> None:
        """Give macro(s) a halo (keep-out) of ``halo`` µm: one number for every side, or
        ``(left, bottom, right, top)`` of the placed footprint (one undo step).

        The halo keeps standard cells and other macros' footprints away (the halo rule in
        DEVELOPERS.md); the placer honours it on the next :meth:`place`, :meth:`refine` or
        :meth:`legalize`.  Raises :class:`DesignError` naming the macro for a negative or
        non-finite value, or a block that is not a macro; nothing changes then.
        """
        lst = self._names(names)
        idx = np.array([self.design.block(nm) for nm in lst], dtype=np.int64)
        kind = self.design.kind[idx]
        if (kind != MACRO).any():
            nm = lst[int(np.flatnonzero(kind != MACRO)[0])]
            raise DesignError(f"block {nm!r}: halos are set on macros only")
        try:
            vals = [halo] * 4 if np.ndim(halo) == 0 else list(halo)
        except TypeError:
            vals = []
        where = f"block {lst[0]!r}" if lst else "set_halo"
        if len(vals) != 4:
            raise DesignError(f"{where}: a halo is one number or four (left, bottom, right, "
                              f"top), got {halo!r}")
        h = [_finite(v, f"{where}: halo") for v in vals]
        if min(h) < 0:
            raise DesignError(f"{where}: halo {h} must not be negative")
        hl = self.design.halo.copy()
        hl[idx] = h
        self._constrain("set_halo", ((names if isinstance(names, str) else lst,
                                      h if np.ndim(halo) else h[0]),), blocks=idx, halo=hl)

    # --- cell regions: fences and guides for groups of cells -----------------------------------
    def _regions_with(self, regions: list[dict], member: np.ndarray) -> CellRegions:
        return CellRegions.build(self.design.num_blocks, regions, member)

    @_locked
    def add_region(self, name: str, rects, kind: str = "fence") -> None:
        """Add an empty cell region ``name`` over ``rects`` (one rectangle ``[xlo, ylo, xhi,
        yhi]`` or a list of non-overlapping ones, inside the die); :meth:`assign_group` gives
        it cells.  ``kind``: ``"fence"`` (members stay inside, other cells stay out) or
        ``"guide"`` (members pulled toward it, may spill).  One undo step; the placer honours
        it on the next :meth:`place` or :meth:`refine`.

        Raises :class:`DesignError` naming the region for a used or empty name, an unknown
        kind, or a rectangle without area, outside the die or overlapping another of it.
        """
        if not isinstance(name, str) or not name.strip():
            raise DesignError(f"region {name!r}: a region needs a non-empty text name")
        reg = self.design.regions
        if name in reg.names:
            raise DesignError(f"region {name!r}: there is already a region of that name")
        if kind not in REGION_TYPES:
            raise DesignError(f"region {name!r}: kind must be one of "
                              f"{', '.join(REGION_TYPES)}, got {kind!r}")
        many = isinstance(rects, (list, tuple, np.ndarray)) and len(rects) > 0 \
            and isinstance(rects[0], (list, tuple, np.ndarray))
        boxes = [self._rect_in_die(r, f"region {name!r}") for r in (rects if many
                                                                     else [rects])]
        regions = reg.to_list() + [{"name": name, "type": kind, "rects": boxes}]
        self._constrain("add_region", ((name, boxes if many else boxes[0]),
                                       {} if kind == "fence" else {"kind": kind}),
                        regions=self._regions_with(regions, reg.member))

    @_locked
    def remove_region(self, name: str) -> None:
        """Delete cell region ``name``; its cells belong to no region afterwards."""
        reg = self.design.regions
        k = reg.index(name)
        regions = reg.to_list()
        del regions[k]
        m = reg.member.copy()
        m[m == k] = -1
        m[m > k] -= 1
        self._constrain("remove_region", ((name,),), blocks=reg.members(k),
                        regions=self._regions_with(regions, m))

    @_locked
    def assign_group(self, region: str | None, names: Iterable[str] | None = None, *,
                     prefix: str | None = None, depth: int = 1, separators: str = "/."):
        """Make a group of cells members of ``region`` (``None``: of no region).

        The group is either ``names`` (standard cells and clusters only), or the hierarchy
        group ``prefix`` at ``depth`` (:func:`floorwidget.hierarchy.hierarchy_groups` with
        ``separators``; ``""`` is the top level), whose cells and clusters are taken (its
        macros and terminals are not regions' business).  A block belongs to one region at
        most: assigning moves it.  One undo step.

        Returns
        -------
        int
            The number of blocks assigned.

        Raises
        ------
        DesignError
            Unknown region, a name that is not a cell or cluster, an unknown or cell-less
            hierarchy group, or both or neither of ``names`` and ``prefix``; nothing changes.
        KeyError
            An unknown block name.
        """
        d = self.design
        reg = d.regions
        k = -1 if region is None else reg.index(region)
        if (names is None) == (prefix is None):
            raise DesignError(f"region {region!r}: give either names or a hierarchy prefix")
        soft = (d.kind == CELL) | (d.kind == CLUSTER)
        if names is not None:
            lst = self._names(names)
            idx = np.array([d.block(nm) for nm in lst], dtype=np.int64)
            bad = ~soft[idx]
            if bad.any():
                raise DesignError(f"block {lst[int(np.flatnonzero(bad)[0])]!r}: only standard "
                                  "cells and clusters belong to cell regions")
            log = ((region, lst), {})
        else:
            from .hierarchy import hierarchy_groups  # noqa: PLC0415
            if isinstance(depth, bool) or not isinstance(depth, (int, np.integer)) \
                    or depth < 0:
                raise DesignError(f"region {region!r}: depth must be a whole number >= 0, "
                                  f"got {depth!r}")
            g = hierarchy_groups(d.names, int(depth), separators)
            if prefix not in g.keys:
                raise DesignError(f"region {region!r}: no hierarchy group {prefix!r} at depth "
                                  f"{int(depth)}")
            idx = np.flatnonzero((g.index == g.keys.index(prefix)) & soft)
            if not len(idx):
                raise DesignError(f"region {region!r}: hierarchy group {prefix!r} has no "
                                  "standard cells or clusters")
            kw = {"prefix": prefix, "depth": int(depth)}
            if separators != "/.":
                kw["separators"] = separators
            log = ((region,), kw)
        m = reg.member.copy()
        m[idx] = k
        self._constrain("assign_group", log, blocks=idx,
                        regions=CellRegions(reg.names, reg.kind, reg.rect_start, reg.rects, m,
                                            reg.groups))
        return int(len(idx))

    # --- placer calls --------------------------------------------------------------------------
    def _run_placer(self, action: str, fn: Callable, opts: dict, progress) -> None:
        d = self.design
        opts = {k: _plain(v, f"{action} option {k!r}") for k, v in opts.items()}
        with self._lock:
            before = self._fp
            work = before.copy()  # the placer gets a private, writable copy
        # the solve runs without the lock, so a notebook stays responsive while a background
        # thread places; the result is committed only onto the floorplan it started from
        out = fn(d, work, progress=progress, **opts) if progress is not None else \
            fn(d, work, **opts)
        with self._lock:
            if self._fp is not before:
                raise DesignError(f"the floorplan changed while {action} was running; its "
                                  "result was discarded (run it again)")
            self._check_and_commit(action, before, out, opts)

    def _check_and_commit(self, action: str, before: Floorplan, out, opts: dict) -> None:
        d = self.design
        if not isinstance(out, Floorplan) or out.design is not d:
            raise DesignError(f"{action} returned {type(out).__name__}, not a Floorplan of "
                              f"design {d.name!r}")
        keep = before.status != MOVABLE
        moved = keep & (_bits_differ(before.x, out.x) | _bits_differ(before.y, out.y)
                        | (before.orient != out.orient) | (before.status != out.status))
        if moved.any():
            from .placer.errors import PlacementError  # noqa: PLC0415
            j = int(np.flatnonzero(moved)[0])
            raise PlacementError(f"{action} changed {STATUS_NAMES[before.status[j]]} block "
                                 f"{d.names[j]!r}; the floorplan was left unchanged")
        self._commit(action, out.copy(), log=((), opts), blocks=None)

    def place(self, *, target_density: float | None = None, seed: int = 0,
              progress: Callable | None = None, **options) -> None:
        """Run the global placer around the pinned and fixed blocks (undoable).

        Parameters
        ----------
        target_density : float, optional
            Default :attr:`target_density`.
        seed : int
        progress : callable, optional
            ``progress(stage, fraction, info)``; default :attr:`progress`.  Not recorded.
        **options
            Passed to :func:`floorwidget.placer.place` and recorded for :meth:`script`
            (they must be plain values: numbers, strings, lists, dicts).

        Raises
        ------
        PlacementError
            Infeasible; the floorplan and history are unchanged.
        """
        from .placer import place as _place  # noqa: PLC0415
        opts = {"target_density": self.target_density if target_density is None
                else _density(target_density), "seed": int(seed), **options}
        self._run_placer("place", _place, opts, progress or self.progress)

    def refine(self, *, target_density: float | None = None, seed: int = 0,
               progress: Callable | None = None, **options) -> None:
        """Improve the current floorplan incrementally (see :meth:`place` for parameters)."""
        from .placer import refine as _refine  # noqa: PLC0415
        opts = {"target_density": self.target_density if target_density is None
                else _density(target_density), "seed": int(seed), **options}
        self._run_placer("refine", _refine, opts, progress or self.progress)

    def legalize(self, **options) -> None:
        """Legalise the macros of the current floorplan (undoable).

        Raises :class:`~floorwidget.placer.errors.PlacementError` when infeasible, leaving the
        floorplan and history unchanged.
        """
        from .placer import legalize as _legalize  # noqa: PLC0415
        self._run_placer("legalize", _legalize, dict(options), None)

    # --- undo / redo ---------------------------------------------------------------------------
    @_locked
    def undo(self) -> None:
        """Undo the last step (a batch counts as one).  ``DesignError`` when there is none."""
        self._step(forward=False)

    @_locked
    def redo(self) -> None:
        """Redo the last undone step.  ``DesignError`` when there is none."""
        self._step(forward=True)

    def _step(self, forward: bool) -> None:
        action = "redo" if forward else "undo"
        self._no_batch(action)
        src, dst = (self._redo, self._undo) if forward else (self._undo, self._redo)
        if not src:
            raise DesignError(f"nothing to {action}")
        step = src.pop()
        self._apply(step, forward=forward)
        dst.append(step)
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
            yield from self._batch(label)

    def _batch(self, label: str) -> Iterator[Session]:
        b = _Batch(label, self._fp, self._state_id, dict(self._alts), list(self._redo))
        self._batches.append(b)
        ok = False
        try:
            yield self
            ok = True
        finally:
            self._batches.pop()
            if not ok:
                self._fp, self._state_id = b.start_fp, b.start_id
                self._alts = b.start_alts
                self._redo = b.start_redo
        entry = {"op": "batch", "label": label, "actions": b.log}
        if self._batches:
            outer = self._batches[-1]
            outer.log.append(entry)
            if b.blocks is None or outer.blocks is None:
                outer.blocks = None
            else:
                outer.blocks.update(b.blocks)
            return
        start = b.start_fp
        cur = self._fp
        if b.blocks is None:
            idx = _changed(start, cur)
        else:  # only hand edits inside: diff the blocks they touched
            t = np.array(sorted(b.blocks), dtype=np.int64)
            idx = t[_bits_differ(start.x[t], cur.x[t]) | _bits_differ(start.y[t], cur.y[t])
                    | (start.orient[t] != cur.orient[t]) | (start.status[t] != cur.status[t])]
        redesign = start.design is not cur.design
        if len(idx) or redesign:
            self._undo.append(_Step(
                label, idx,
                (start.x[idx].copy(), start.y[idx].copy(), start.orient[idx].copy(),
                 start.status[idx].copy()),
                (cur.x[idx].copy(), cur.y[idx].copy(), cur.orient[idx].copy(),
                 cur.status[idx].copy()),
                dict(start.info), dict(cur.info), b.start_id, self._state_id,
                *((start.design, cur.design) if redesign else ())))
            self._redo.clear()
        self._log.append(entry)
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

    @_locked
    def snapshot(self, label: str, note: str = "") -> Alternative:
        """Keep the current floorplan and its report as alternative ``label`` (unique)."""
        label = self._check_label(label)
        alt = Alternative(label, self._fp, dict(self._report_for(self._state_id, self._fp)),
                          str(note), _now(), None)
        self._alts[label] = alt
        self._record("snapshot", (label,), {"note": str(note)} if note else {})
        self._emit("snapshot", [], label)
        return alt

    @_locked
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
        fp = _freeze(Floorplan(self.design, floorplan.x, floorplan.y, floorplan.orient,
                               floorplan.status, floorplan.info))
        if report is None:
            from .metrics import evaluate  # noqa: PLC0415
            report = evaluate(self.design, fp, target_density=self.target_density)
        params = None if params is None else _plain(dict(params), "params")
        alt = Alternative(label, fp, dict(report), str(note), _now(), params)
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
        """The alternative ``label`` (``KeyError`` naming it when unknown)."""
        try:
            return self._alts[label]
        except KeyError:
            known = ", ".join(map(repr, self._alts)) or "none"
            raise KeyError(f"no alternative labelled {label!r} (known: {known})") from None

    @_locked
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
            from .metrics import evaluate  # noqa: PLC0415
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
    @_locked
    def script(self) -> str:
        """Plain Python that rebuilds this session in a fresh interpreter.

        It loads the design from ``design.source`` (absolute path), creates
        ``session = fw.Session(design, ...)`` and replays every logged action (placer calls with
        their seed and every option), ending with the replayed session bound to ``session``.
        The replayed floorplan is bit-identical (floats are written with ``repr``).

        Raises
        ------
        DesignError
            When the design was not loaded from a file (no ``design.source``): the script could
            not load it.  Save the design first (``fw.save``) and load it back.
        """
        if self._source is None:
            raise DesignError(f"design {self.design.name!r} has no source file, so a script "
                              "cannot load it; save it with fw.save() and fw.load() it first")
        from .session_io import script_text  # noqa: PLC0415
        return script_text(self)

    @_locked
    def save(self, path) -> None:
        """Write the session (design reference, floorplans, alternatives, log, history) as
        versioned JSON, atomically: the file is either the complete new one or untouched."""
        from .session_io import save_session  # noqa: PLC0415
        save_session(self, path)

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
            A damaged or mismatching file, naming it (and the JSON path or line).
        """
        from .session_io import load_session  # noqa: PLC0415
        return load_session(cls, path, design)

    def __repr__(self) -> str:
        return (f"<Session of {self.design.name!r}: {len(self._undo)} undo, "
                f"{len(self._redo)} redo, {len(self._alts)} alternatives>")


def _copy_log(v):
    """Copy log entries (containers copied, read-only floorplans shared)."""
    if isinstance(v, dict):
        return {k: _copy_log(x) for k, x in v.items()}
    if isinstance(v, list):
        return [_copy_log(x) for x in v]
    return v


def _plain(v, what: str):
    """``v`` as plain Python values (numpy scalars and arrays converted) that ``repr`` and JSON
    reproduce exactly; :class:`DesignError` for anything else (it could not be replayed)."""
    if v is None or isinstance(v, (bool, str)):
        return v
    if isinstance(v, np.generic):
        return v.item()
    if isinstance(v, int):
        return int(v)
    if isinstance(v, float):
        return float(v)
    if isinstance(v, np.ndarray):
        return _plain(v.tolist(), what)
    if isinstance(v, (list, tuple)):
        return [_plain(x, what) for x in v]
    if isinstance(v, Mapping):
        out = {}
        for k, x in v.items():
            if not isinstance(k, str):
                raise DesignError(f"{what}: keys must be strings, got {k!r}")
            out[k] = _plain(x, f"{what}.{k}")
        return out
    raise DesignError(f"{what} is a {type(v).__name__}, which the action record cannot "
                      "replay; pass numbers, strings, lists or dicts")


# ---------------------------------------------------------------------------------------------


@dataclass
class Comparison:
    """What changed from floorplan ``a`` to floorplan ``b``.

    Attributes
    ----------
    a, b : str
        Labels.
    metrics : dict
        ``key -> (a_value, b_value, delta)`` for every report key; ``delta = b - a``
        (booleans count as 0/1).
    moved : list of (name, dx, dy, distance)
        Macros whose lower-left corner moved, largest distance first.
    reoriented : list of (name, orient_a, orient_b)
    status_changed : list of (name, status_a, status_b)
    others_moved : int
        Non-macro blocks (clusters, cells, terminals) that moved.
    """

    a: str
    b: str
    metrics: dict
    moved: list
    reoriented: list
    status_changed: list
    others_moved: int

    @classmethod
    def of(cls, design: Design, la: str, fa: Floorplan, ra: Mapping, lb: str, fb: Floorplan,
           rb: Mapping) -> Comparison:
        metrics = {}
        for k in list(ra) + [k for k in rb if k not in ra]:
            va, vb = ra.get(k), rb.get(k)
            try:
                delta = (float(vb) - float(va)) if va is not None and vb is not None else None
                if isinstance(va, (bool, np.bool_)) or isinstance(vb, (bool, np.bool_)):
                    delta = int(bool(vb)) - int(bool(va))
                elif isinstance(va, (int, np.integer)) and isinstance(vb, (int, np.integer)):
                    delta = int(vb) - int(va)
            except (TypeError, ValueError):
                delta = None
            metrics[k] = (va, vb, delta)
        dx, dy = fb.x - fa.x, fb.y - fa.y
        dist = np.hypot(dx, dy)
        macro = design.kind == MACRO
        mv = np.flatnonzero(macro & (dist > 0))
        mv = mv[np.argsort(-dist[mv], kind="stable")]
        names = design.names
        moved = [(names[i], float(dx[i]), float(dy[i]), float(dist[i])) for i in mv]
        ro = np.flatnonzero(fa.orient != fb.orient)
        reoriented = [(names[i], ORIENTATIONS[fa.orient[i]], ORIENTATIONS[fb.orient[i]])
                      for i in ro]
        st = np.flatnonzero(fa.status != fb.status)
        status_changed = [(names[i], STATUS_NAMES[fa.status[i]], STATUS_NAMES[fb.status[i]])
                          for i in st]
        return cls(la, lb, metrics, moved, reoriented, status_changed,
                   int(np.count_nonzero(~macro & (dist > 0))))

    def to_dict(self) -> dict:
        return {"a": self.a, "b": self.b,
                "metrics": {k: {"a": v[0], "b": v[1], "delta": v[2]}
                            for k, v in self.metrics.items()},
                "moved": [{"name": n, "dx": x, "dy": y, "distance": r}
                          for n, x, y, r in self.moved],
                "reoriented": [{"name": n, "a": o1, "b": o2} for n, o1, o2 in self.reoriented],
                "status_changed": [{"name": n, "a": s1, "b": s2}
                                   for n, s1, s2 in self.status_changed],
                "others_moved": self.others_moved}

    @staticmethod
    def _fmt(v) -> str:
        if v is None:
            return "-"
        if isinstance(v, (bool, np.bool_)):
            return "yes" if v else "no"
        if isinstance(v, (int, np.integer)):
            return f"{int(v):d}"
        if isinstance(v, (float, np.floating)):
            return f"{float(v):.6g}"
        return str(v)

    def __str__(self) -> str:
        rows = [("metric", self.a, self.b, "b - a")]
        for k, (va, vb, d) in self.metrics.items():
            ds = "-" if d is None else (f"{d:+d}" if isinstance(d, int) else f"{d:+.6g}")
            rows.append((k, self._fmt(va), self._fmt(vb), ds))
        wid = [max(len(r[c]) for r in rows) for c in range(4)]
        lines = ["  ".join(r[c].ljust(wid[c]) if c == 0 else r[c].rjust(wid[c])
                           for c in range(4)) for r in rows]
        lines.insert(1, "  ".join("-" * w for w in wid))
        lines.append("")
        if self.moved:
            lines.append(f"{len(self.moved)} macro(s) moved (µm):")
            nw = max(len(m[0]) for m in self.moved)
            lines.append(f"  {'macro'.ljust(nw)}  {'dx':>10}  {'dy':>10}  {'distance':>10}")
            for n, x, y, r in self.moved:
                lines.append(f"  {n.ljust(nw)}  {x:>+10.3f}  {y:>+10.3f}  {r:>10.3f}")
        else:
            lines.append("no macro moved")
        for n, o1, o2 in self.reoriented:
            lines.append(f"orientation {n}: {o1} -> {o2}")
        for n, s1, s2 in self.status_changed:
            lines.append(f"status {n}: {s1} -> {s2}")
        if self.others_moved:
            lines.append(f"{self.others_moved} other block(s) moved")
        lines.append("(early-floorplanning estimates, not sign-off figures)")
        return "\n".join(lines)

    def __repr__(self) -> str:
        return str(self)

    def _repr_html_(self) -> str:
        import html  # noqa: PLC0415
        return "<pre>" + html.escape(str(self)) + "</pre>"
