"""Hand edits of a session: move, pin, unpin, rotate, flip, set an orientation, and the
arranging of groups of macros (:mod:`floorwidget.arrange` does the geometry).

:class:`HandEdits` is a mixin of :class:`~floorwidget.session.Session`; it relies on the
session's ``_fp``, ``_commit`` and lock.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable, Iterable

import numpy as np

from .. import arrange
from ..design import (
    FIXED,
    MACRO,
    MOVABLE,
    ORIENTATIONS,
    PINNED,
    TERMINAL,
    Design,
    DesignError,
    orient_size,
)
from ..design import snap as _snap
from ..floorplan.pins import snap_pin
from . import checks

__all__ = ["HandEdits", "locked", "next_orientation"]


def locked(method):
    """Run ``method`` holding the session's re-entrant lock (one change at a time)."""

    @functools.wraps(method)
    def wrapper(self, *args, **kwargs):
        with self._lock:
            return method(self, *args, **kwargs)

    return wrapper


def next_orientation(kind: str, code: int, allowed: int) -> int | None:
    """The orientation after a rotation (``kind="rotate"``: 90° counter-clockwise, skipping
    disallowed ones) or a mirror (``"flip"``) of ``code`` among the bitmask ``allowed``;
    ``None`` when there is no other allowed one.  The group tables are
    :func:`floorwidget.placer.orient.rotated` and :func:`~floorwidget.placer.orient.flipped`."""
    from ..placer.orient import flipped, rotated  # noqa: PLC0415 - keeps the import light
    c = int((rotated if kind == "rotate" else flipped)(code, allowed))
    return c if c != code and allowed >> c & 1 else None


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
    k_hi = max(k_hi, k_lo)
    kc = float(min(max(k, k_lo), k_hi))
    if kc == k:
        return float(_snap(v, origin, pitch))  # inside the range: exactly design.snap
    return float(origin + kc * pitch)


def _clamp(v: float, size: float, lo: float, hi: float) -> float:
    return float(min(max(v, lo), max(lo, hi - size)))


def fit(design: Design, i: int, x: float, y: float, orient: int) -> tuple[float, float]:
    """Where block ``i`` in orientation ``orient`` goes when asked for ``(x, y)``: macros
    snapped to the grid, every block clamped inside the core (terminals inside the die)."""
    d = design
    w, h = (float(v) for v in orient_size(d.width[i], d.height[i], orient))
    if d.kind[i] == TERMINAL:
        box = d.die
        return _clamp(x, w, box[0], box[2]), _clamp(y, h, box[1], box[3])
    box = d.core
    if d.kind[i] == MACRO:
        (ox, oy), (px, py) = d.grid_origin, d.grid_pitch
        return (_clamp_to_grid(x, w, box[0], box[2], float(ox), float(px)),
                _clamp_to_grid(y, h, box[1], box[3], float(oy), float(py)))
    return _clamp(x, w, box[0], box[2]), _clamp(y, h, box[1], box[3])


class HandEdits:
    """Session methods that change blocks by hand (a mixin of ``Session``)."""

    def _index(self, name) -> int:
        """Index of block ``name`` (``TypeError`` for a non-string, :class:`DesignError`
        naming it and the design when unknown)."""
        return checks.block_index(self.design, name)

    def _indices(self, names) -> tuple[list[str], np.ndarray]:
        lst = checks.name_list(names)
        return lst, np.array([self._index(nm) for nm in lst], dtype=np.int64)

    def _movable_index(self, name, verb: str) -> int:
        i = self._index(name)
        if self._fp.status[i] == FIXED:
            raise DesignError(f"block {name!r} is fixed by the input and cannot be {verb}")
        return i

    @locked
    def move(self, name: str, x: float, y: float) -> tuple[float, float]:
        """Move block ``name`` so its lower-left corner is near ``(x, y)`` µm.

        Macros snap to the placement grid; every other block is clamped inside the core; an
        I/O pin goes to the nearest free slot of its layer on the nearest die edge its layer
        reaches (:func:`floorwidget.floorplan.pins.snap_pin`).  A pinned block may be moved
        by hand and stays pinned; a fixed one may not.

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
        TypeError
            A name that is not text.
        DesignError
            An unknown block (naming it and the design), a fixed block, or a coordinate that
            is not a finite number.
        """
        i = self._movable_index(name, "moved")
        fx, fy = checks.number(x, "x"), checks.number(y, "y")
        if self.design.kind[i] == TERMINAL:  # an I/O pin: the nearest free slot on an edge
            nx, ny = snap_pin(self.design, self._fp, i, fx, fy)
        else:
            nx, ny = fit(self.design, i, fx, fy, int(self._fp.orient[i]))
        new = self._fp.copy()
        new.x[i], new.y[i] = nx, ny
        self._commit("move", new, log=((name, fx, fy),), blocks=[i])
        return nx, ny

    def _set_status(self, action: str, names, status: int) -> None:
        lst = checks.name_list(names)
        idx = np.array([self._movable_index(nm, action + "ned") for nm in lst], dtype=np.int64)
        new = self._fp.copy()
        new.status[idx] = status
        self._commit(action, new, log=((names if isinstance(names, str) else lst,),),
                     blocks=idx)

    @locked
    def pin(self, names: str | Iterable[str]) -> None:
        """Pin block(s): placers will not move them (hand moves still can).

        Raises :class:`DesignError` for an unknown name or a fixed block; nothing is pinned
        then.
        """
        self._set_status("pin", names, PINNED)

    @locked
    def unpin(self, names: str | Iterable[str]) -> None:
        """Make pinned block(s) movable again (fixed blocks stay fixed: an error)."""
        self._set_status("unpin", names, MOVABLE)

    def _turn(self, action: str, i: int, code: int, keep_corner: bool) -> tuple[float, float]:
        """Give block ``i`` orientation ``code``: the footprint centre kept, then re-snapped
        and clamped (or, ``keep_corner``, the corner kept), as one committed step."""
        d, fp = self.design, self._fp
        nx, ny = float(fp.x[i]), float(fp.y[i])
        cur = int(fp.orient[i])
        if code != cur and not keep_corner:
            w0, h0 = (float(v) for v in orient_size(d.width[i], d.height[i], cur))
            w1, h1 = (float(v) for v in orient_size(d.width[i], d.height[i], code))
            nx, ny = fit(d, i, nx + (w0 - w1) / 2, ny + (h0 - h1) / 2, code)
        new = fp.copy()
        new.x[i], new.y[i], new.orient[i] = nx, ny, code
        name = d.names[i]
        self._commit(action, new, log=((name,) if action != "set_orientation"
                                       else (name, ORIENTATIONS[code]),), blocks=[i])
        return nx, ny

    def _reorient(self, action: str, name: str) -> None:
        i = self._movable_index(name, "rotated" if action == "rotate" else "flipped")
        d = self.design
        cur = int(self._fp.orient[i])
        nxt = next_orientation(action, cur, int(d.orient_allowed[i]))
        if nxt is None:
            allowed = ", ".join(d.allowed_orientations(name))
            what = "rotation" if action == "rotate" else "mirror image"
            raise DesignError(f"block {name!r} in {ORIENTATIONS[cur]} has no allowed "
                              f"{what} (allowed: {allowed})")
        # a mirror keeps the footprint, so the corner does not move (nor re-snap)
        self._turn(action, i, nxt, keep_corner=action == "flip")

    @locked
    def rotate(self, name: str) -> None:
        """Turn a block 90° counter-clockwise to its next allowed orientation.

        The footprint centre is kept, then the corner is re-snapped and kept inside the core.
        Raises :class:`DesignError` when no other rotation is allowed or the block is fixed.
        """
        self._reorient("rotate", name)

    @locked
    def flip(self, name: str) -> None:
        """Mirror a block about its vertical axis (N↔FN, S↔FS, E↔FE, W↔FW), in place.

        The footprint is unchanged, so the lower-left corner stays where it is.

        Raises :class:`DesignError` when the mirror image is not an allowed orientation.
        """
        self._reorient("flip", name)

    @locked
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
        d = self.design
        code = ORIENTATIONS.index(orientation)
        if not d.orient_allowed[i] >> code & 1:
            raise DesignError(f"block {name!r} does not allow {orientation} (allowed: "
                              f"{', '.join(d.allowed_orientations(name))})")
        return self._turn("set_orientation", i, code, keep_corner=False)

    # --- arranging groups of macros (floorwidget.arrange does the geometry) -------------------
    def _arrange(self, op: str, names, fn: Callable, args: tuple, kwargs: dict | None = None):
        lst, idx = self._indices(names)
        kwargs = dict(kwargs or {})
        res = fn(self.design, self._fp, idx, *args, **kwargs)
        log_args = (lst, *(checks.plain(a, f"{op} argument") for a in args))
        log_kw = {k: checks.plain(v, f"{op} option {k!r}") for k, v in kwargs.items()
                  if v is not None}
        self._commit(op, res.apply(self._fp), log=(log_args, log_kw), blocks=idx)
        return res

    @locked
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

    @locked
    def distribute(self, names: Iterable[str], axis: str = "x"):
        """Equal gaps between neighbouring macros along ``axis`` (``"x"`` or ``"y"``), the
        outer two staying; see :func:`floorwidget.arrange.distribute`."""
        return self._arrange("distribute", names, arrange.distribute, (axis,))

    @locked
    def array(self, names: Iterable[str], rows: int, cols: int, pitch=None):
        """Pack macros into a ``rows × cols`` array, in the order given, bottom row first.

        ``pitch`` (µm, a number or ``(x, y)``) is the step between neighbouring cells; ``None``
        abuts them under the halo rule.  See :func:`floorwidget.arrange.array`.
        """
        n = len(checks.name_list(names))
        for v, what in ((rows, "rows"), (cols, "cols")):  # refused before anything allocates
            if checks.integer(v, f"array {what}", 1) > max(n, 1):
                raise DesignError(f"array {what} must be at most {n} (the number of macros), "
                                  f"got {v!r}")
        return self._arrange("array", names, arrange.array, (rows, cols), {"pitch": pitch})

    @locked
    def mirror(self, names: Iterable[str], axis: str = "x"):
        """Mirror a group about its centre: ``axis="x"`` swaps left and right, ``"y"`` top and
        bottom; orientations mirrored too.  See :func:`floorwidget.arrange.mirror`."""
        return self._arrange("mirror", names, arrange.mirror, (axis,))

    @locked
    def push(self, names: Iterable[str], side: str | None = None):
        """Move a group as one to a core edge (``None``: the nearest) until it touches it.
        See :func:`floorwidget.arrange.push`."""
        return self._arrange("push", names, arrange.push, (), {"side": side})

    @locked
    def shift(self, names: str | Iterable[str], dx: float, dy: float):
        """Move macros by ``(dx, dy)`` µm as one group, snapped, stopping at the core edge.

        A hand move like :meth:`move`: pinned macros may be shifted (they stay pinned), fixed
        ones may not.  See :func:`floorwidget.arrange.shift`.
        """
        return self._arrange("shift", names, arrange.shift,
                             (checks.number(dx, "dx"), checks.number(dy, "dy")))
