"""Undo history of a session: steps, batches and the current floorplan, with one step builder.

A :class:`Step` holds only the blocks that changed, old and new values bit-exact, and the
designs before and after when it edited constraints.  A single change and a whole batch become
steps through the same :func:`make_step`, from the same :func:`changed` diff, so undo and redo
of either restore exactly the same things.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..design import Design, DesignError, Floorplan

__all__ = ["Step", "Batch", "History", "freeze", "changed", "make_step"]

Values = tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]


@dataclass
class Step:
    """One undoable step: the changed blocks with their old and new values (bit-exact), and
    the designs before and after when the step edited constraints (``None`` otherwise)."""

    action: str
    idx: np.ndarray
    old: Values
    new: Values
    old_info: dict
    new_info: dict
    old_id: int
    new_id: int
    old_design: Design | None = None
    new_design: Design | None = None


@dataclass
class Batch:
    """An open :meth:`Session.batch`: where it started, its log and the blocks it touched
    (``None``: assume all).  ``saved`` is what the session restores besides the history when
    the batch is rolled back."""

    label: str
    start_fp: Floorplan
    start_id: int
    start_redo: list
    saved: Any = None
    log: list = field(default_factory=list)
    blocks: set | None = field(default_factory=set)


def freeze(fp: Floorplan) -> Floorplan:
    """Make ``fp``'s arrays read-only (in place) and return it."""
    for a in (fp.x, fp.y, fp.orient, fp.status):
        a.flags.writeable = False
    return fp


def _bits_differ(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Element-wise "not bit-identical" (``-0.0`` differs from ``0.0``; NaN equals itself)."""
    if a.dtype == np.float64:
        return a.view(np.int64) != b.view(np.int64)
    return a != b


def changed(a: Floorplan, b: Floorplan, blocks=None) -> np.ndarray:
    """Sorted indices of the blocks whose position, orientation or status differ bit for bit
    between ``a`` and ``b``; with ``blocks``, only those are compared (O(k), not O(n))."""
    if blocks is None:
        t = slice(None)
    else:
        t = np.unique(np.asarray(blocks, dtype=np.int64))
    diff = (_bits_differ(a.x[t], b.x[t]) | _bits_differ(a.y[t], b.y[t])
            | (a.orient[t] != b.orient[t]) | (a.status[t] != b.status[t]))
    return np.flatnonzero(diff) if blocks is None else t[diff]


def _values(fp: Floorplan, idx: np.ndarray) -> Values:
    return fp.x[idx].copy(), fp.y[idx].copy(), fp.orient[idx].copy(), fp.status[idx].copy()


def make_step(action: str, old: Floorplan, new: Floorplan, idx: np.ndarray, old_id: int,
              new_id: int) -> Step:
    """The step that takes ``old`` (state ``old_id``) to ``new`` (state ``new_id``) given the
    changed blocks ``idx``; the designs are kept when they differ (a constraint edit)."""
    redesign = old.design is not new.design
    return Step(action, idx, _values(old, idx), _values(new, idx), dict(old.info),
                dict(new.info), old_id, new_id,
                *((old.design, new.design) if redesign else ()))


class History:
    """The current floorplan, its state id, the undo and redo stacks, open batches and the
    action log of one session.

    State ids name floorplans: every committed change gets a fresh one, undo and redo go back
    to the ids the step recorded, so a cache keyed by id (the session's reports) stays valid.
    """

    def __init__(self, fp: Floorplan, undo=(), redo=(), log=(), state_id: int = 0):
        """A history at floorplan ``fp`` (state ``state_id``); a history read back from a
        file brings its steps and log, and new changes get ids above all of theirs."""
        self.fp = freeze(fp)
        self.state_id = state_id
        self.undo: list[Step] = list(undo)
        self.redo: list[Step] = list(redo)
        self.batches: list[Batch] = []
        self.log: list[dict] = list(log)
        self.next_id = max([state_id, *(s.new_id for s in self.undo + self.redo)]) + 1

    def _new_id(self) -> int:
        nid = self.next_id
        self.next_id += 1
        return nid

    def record(self, entry: dict) -> None:
        """Append a log entry (to the innermost open batch, if any)."""
        (self.batches[-1].log if self.batches else self.log).append(entry)

    def commit(self, action: str, new: Floorplan, blocks=None) -> np.ndarray:
        """Make ``new`` current as one undoable step (inside a batch: part of the batch's);
        returns the changed block indices.  ``blocks`` names the only blocks that may have
        changed (hand edits), so only those are compared."""
        old = self.fp
        redesign = new.design is not old.design
        idx = changed(old, new, blocks if new.info == old.info else None)
        new = freeze(new)
        if not len(idx) and not redesign:
            if old.info != new.info:
                # only the facts in .info changed (e.g. a placer run that moved nothing): take
                # them, but make no undo step that would look like it did nothing
                self.fp = new
            return idx
        nid = self._new_id()
        if not self.batches:
            self.undo.append(make_step(action, old, new, idx, self.state_id, nid))
        self.redo.clear()
        self.fp, self.state_id = new, nid
        return idx

    def apply(self, step: Step, forward: bool) -> None:
        """Set the floorplan to the state after (``forward``) or before ``step``."""
        vals, info, sid, design = ((step.new, step.new_info, step.new_id, step.new_design)
                                   if forward else
                                   (step.old, step.old_info, step.old_id, step.old_design))
        fp = self.fp.copy()
        if design is not None:
            fp = Floorplan(design, fp.x, fp.y, fp.orient, fp.status)
        i = step.idx
        fp.x[i], fp.y[i], fp.orient[i], fp.status[i] = vals
        fp.info = dict(info)
        self.fp, self.state_id = freeze(fp), sid

    def step(self, forward: bool) -> Step:
        """Undo (or redo) one step; :class:`DesignError` when there is none or a batch is
        open."""
        action = "redo" if forward else "undo"
        self.no_batch(action)
        src, dst = (self.redo, self.undo) if forward else (self.undo, self.redo)
        if not src:
            raise DesignError(f"nothing to {action}")
        step = src.pop()
        self.apply(step, forward=forward)
        dst.append(step)
        return step

    def join_last(self, step: bool) -> None:
        """Make the last log entry part of the one before it (one batch) and, with ``step``,
        the last undo step part of the one before it: a result computed in the background
        joins the edit it answers, so one undo reverts both, exactly, and a replay of the log
        runs them as one batch.  The caller checks that nothing else came between."""
        last = self.log.pop()
        prev = self.log[-1]
        if prev.get("op") == "batch":
            self.log[-1] = {**prev, "actions": [*prev["actions"], last]}
        else:
            self.log[-1] = {"op": "batch", "label": prev["op"], "actions": [prev, last]}
        if not step or len(self.undo) < 2 or self.undo[-2].new_id != self.undo[-1].old_id:
            return
        a, b = self.undo[-2], self.undo[-1]
        cur, sid = self.fp, self.state_id
        self.apply(b, forward=False)
        self.apply(a, forward=False)
        start = self.fp
        self.fp, self.state_id = cur, sid
        self.undo[-2:] = [make_step(a.action, start, cur, np.union1d(a.idx, b.idx), a.old_id,
                                    b.new_id)]

    def no_batch(self, what: str) -> None:
        if self.batches:
            raise DesignError(f"{what} is not allowed inside a batch "
                              f"({self.batches[-1].label!r})")

    # --- batches -------------------------------------------------------------------------------
    def begin(self, label: str, saved: Any = None) -> Batch:
        b = Batch(label, self.fp, self.state_id, list(self.redo), saved)
        self.batches.append(b)
        return b

    def touch(self, blocks) -> None:
        """Note the blocks an event inside the open batch named (``None``: all)."""
        b = self.batches[-1]
        if blocks is None or b.blocks is None:
            b.blocks = None
        else:
            b.blocks.update(int(i) for i in np.asarray(blocks).ravel())

    def end(self, b: Batch, ok: bool) -> bool:
        """Close batch ``b``.  Rolled back (``ok`` false): the floorplan, state and redo stack
        return to where it started.  Otherwise its log becomes one entry of the enclosing log
        and, at the outermost level, its changes one step (built like any other).  Returns
        whether the outermost batch ended (the caller then notifies)."""
        self.batches.pop()
        if not ok:
            self.fp, self.state_id, self.redo = b.start_fp, b.start_id, b.start_redo
            return False
        self.record({"op": "batch", "label": b.label, "actions": b.log})
        if self.batches:
            outer = self.batches[-1]
            if b.blocks is None or outer.blocks is None:
                outer.blocks = None
            else:
                outer.blocks.update(b.blocks)
            return False
        start, cur = b.start_fp, self.fp
        idx = changed(start, cur, None if b.blocks is None else sorted(b.blocks))
        if len(idx) or start.design is not cur.design:
            self.undo.append(make_step(b.label, start, cur, idx, b.start_id, self.state_id))
            self.redo.clear()
        return True
