"""Placer calls of a session: :meth:`place`, :meth:`refine`, :meth:`legalize` (a mixin of
:class:`~floorwidget.session.Session`).

The solve runs on a private copy without the session's lock, so a notebook stays responsive
while a background thread places; the result is committed only onto the floorplan it started
from, and only if pinned and fixed blocks came back bit for bit.
"""

from __future__ import annotations

from collections.abc import Callable
from concurrent.futures import Executor, Future

from .._threads import pool
from ..design import MOVABLE, STATUS_NAMES, DesignError, Floorplan
from . import checks
from .history import changed

__all__ = ["PlacerCalls", "Superseded"]


class Superseded(Exception):  # noqa: N818 - it names what happened, not a failure
    """A background run stopped because the session moved on (an edit, undo or redo came
    first); nothing was committed."""


class PlacerCalls:
    """Session methods that run the placer (a mixin of ``Session``)."""

    def _run_options(self, target_density, seed, options: dict) -> dict:
        """The options a place or refine runs and records with, checked."""
        td = self.target_density if target_density is None else checks.density(target_density)
        return {"target_density": td,
                "seed": checks.integer(seed, "seed", 0, checks.SEED_LIMIT), **options}

    def _run_placer(self, action: str, fn: Callable, opts: dict, progress,
                    extra: dict | None = None, answers: tuple[int, int] | None = None) -> None:
        """Run ``fn`` on a private copy with ``opts`` (recorded) and ``extra`` (not recorded:
        derived from the history, so a replay derives the same) and commit the result.

        ``answers = (state id, log length)``: the run answers that state (see
        :meth:`refine_later`); it raises :class:`Superseded` when the session is elsewhere,
        and its result joins the edit that made the state when nothing was logged since."""
        d = self.design
        opts = {k: checks.plain(v, f"{action} option {k!r}") for k, v in opts.items()}
        h = self._history
        with self._lock:
            if answers is not None and h.state_id != answers[0]:
                raise Superseded(action)
            before = self._fp
            work = before.copy()  # the placer gets a private, writable copy
        run = {**opts, **(extra or {})}
        out = fn(d, work, progress=progress, **run) if progress is not None else \
            fn(d, work, **run)
        with self._lock:
            if self._fp is not before:
                if answers is not None:
                    raise Superseded(action)
                raise DesignError(f"the floorplan changed while {action} was running; its "
                                  "result was discarded (run it again)")
            join = answers is not None and 0 < answers[1] == len(h.log)  # nothing logged since
            self._check_and_commit(action, before, out, opts, join)
            self._placed = self._fp

    def _check_and_commit(self, action: str, before: Floorplan, out, opts: dict,
                          join: bool = False) -> None:
        d = self.design
        if not isinstance(out, Floorplan) or out.design is not d:
            raise DesignError(f"{action} returned {type(out).__name__}, not a Floorplan of "
                              f"design {d.name!r}")
        moved = changed(before, out)
        moved = moved[before.status[moved] != MOVABLE]
        if len(moved):
            from ..placer.errors import PlacementError  # noqa: PLC0415
            j = int(moved[0])
            raise PlacementError(f"{action} changed {STATUS_NAMES[before.status[j]]} block "
                                 f"{d.names[j]!r}; the floorplan was left unchanged")
        self._commit(action, out.copy(), log=((), opts), blocks=None, join=join)

    def place(self, *, target_density: float | None = None, seed: int = 0,
              progress: Callable | None = None, **options) -> None:
        """Run the global placer around the pinned and fixed blocks (undoable).

        Parameters
        ----------
        target_density : float, optional
            Default :attr:`target_density`; a number in (0, 1].
        seed : int
            A whole number in [0, 2^32).
        progress : callable, optional
            ``progress(stage, fraction, info)``; default :attr:`progress`.  Not recorded.
        **options
            Passed to :func:`floorwidget.placer.place` and recorded for :meth:`script`
            (they must be plain values: numbers, strings, lists, dicts).

        Raises
        ------
        PlacementError
            Infeasible; the floorplan and history are unchanged.
        DesignError
            A target density or seed of the wrong type or range.
        """
        from ..placer import place as _place  # noqa: PLC0415
        opts = self._run_options(target_density, seed, options)
        self._run_placer("place", _place, opts, progress or self.progress)

    def refine(self, *, target_density: float | None = None, seed: int = 0,
               progress: Callable | None = None, local: bool = True, **options) -> None:
        """Improve the current floorplan incrementally (see :meth:`place` for parameters).

        With ``local`` (the default), only the logic near the blocks changed since the last
        placer result of this session (or since the floorplan it started from) is re-spread
        and put back on rows
        (:func:`floorwidget.placer.refine` with ``around``; no detailed-placement pass unless
        ``detail_passes`` is given), so a drag costs what it changed.  ``local=False``
        re-spreads everything.  What changed is read from the history, so a
        replay of the session makes the same choice.
        """
        fn, opts, extra = self._refine_call(target_density, seed, local, options)
        self._run_placer("refine", fn, opts, progress or self.progress, extra)

    def _refine_call(self, target_density, seed, local, options: dict):
        """What :meth:`refine` passes to :meth:`_run_placer`: the function, the recorded
        options and the unrecorded ones (the window, read from the history now)."""
        from ..placer import refine as _refine  # noqa: PLC0415
        if not isinstance(local, bool):
            raise DesignError(f"refine: local must be True or False, got {local!r}")
        opts = self._run_options(target_density, seed, options)
        if not local:
            opts["local"] = False  # recorded: the replay refines everything too
        extra: dict = {}
        with self._lock:
            placed = self._placed
            if local and placed is not None and placed.design.same_netlist(self.design):
                extra["around"] = changed(placed, self._fp).tolist()
                if "detail_passes" not in options:
                    extra["detail_passes"] = 0

        def run(design, fp, local=True, **kw):
            return _refine(design, fp, **kw)

        return run, opts, extra

    def refine_later(self, *, target_density: float | None = None, seed: int = 0,
                     progress: Callable | None = None, local: bool = True,
                     executor: Executor | None = None, **options) -> Future:
        """:meth:`refine` in the background, as the answer to the current state.

        It returns at once.  The run stops at its next progress report once the session has
        moved on (an edit, undo or redo: a newer edit supersedes it), and its result is
        committed only onto the state it answers, so no stale result lands on a newer edit.
        When nothing was logged in between, the result joins the edit that made that state:
        one undo step, one log batch (a replay runs the edit and the refine together, as a
        script's ``with s.batch(...): ...; s.refine()`` does).

        Parameters
        ----------
        target_density, seed, progress, local, **options
            As for :meth:`refine` (the window is read from the history now).
        executor : concurrent.futures.Executor, optional
            Where it runs; default the package's ``"placer"`` pool (one worker).

        Returns
        -------
        concurrent.futures.Future
            Its result is ``True`` when the refine was committed (or moved nothing) and
            ``False`` when it was superseded; a failure (e.g.
            :class:`~floorwidget.placer.errors.PlacementError`) is its exception.
        """
        h = self._history
        with self._lock:
            h.no_batch("refine_later")
            answers = (h.state_id, len(h.log))
        fn, opts, extra = self._refine_call(target_density, seed, local, options)
        user = progress or self.progress

        def watch(stage: str, fraction: float, info: dict | None = None) -> None:
            if h.state_id != answers[0]:
                raise Superseded("refine")
            if user is not None:
                user(stage, fraction, info)

        def job() -> bool:
            try:
                self._run_placer("refine", fn, opts, watch, extra, answers=answers)
            except Superseded:
                return False
            return True

        return (executor or pool("placer", 1)).submit(job)

    def legalize(self, **options) -> None:
        """Legalise the macros of the current floorplan (undoable).

        Raises :class:`~floorwidget.placer.errors.PlacementError` when infeasible, leaving the
        floorplan and history unchanged.
        """
        from ..placer import legalize as _legalize  # noqa: PLC0415
        self._run_placer("legalize", _legalize, dict(options), None)
