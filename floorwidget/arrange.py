"""Hand arrangement of macros: align, distribute, array, mirror, push to a core edge, shift.

Each function is pure: it takes ``(design, floorplan, idx, ...)`` — ``idx`` the block indices
of the macros to arrange, in the order that matters (the array fills in that order) — and
returns an :class:`Arranged` with their new lower-left corners and orientations; the floorplan
is never modified.  :class:`floorwidget.session.Session` turns each into one undoable, recorded
action (``Session.align``, ``distribute``, ``array``, ``mirror``, ``push``, ``shift``).

Common rules
------------
* Every result is snapped to the placement grid (``design.grid_origin + k * grid_pitch``,
  rounding to nearest as :func:`floorwidget.design.snap`) and kept inside the core the way
  ``Session.move`` keeps one macro: a corner that would leave the core is clamped to the last
  grid point that fits.  Groups that move as one (array, mirror, push, shift) are first shifted
  as a whole by a whole number of grid steps so that they keep their shape where they fit.
* Only macros may be arranged; fixed macros are refused, and so are pinned ones except by
  :func:`shift` (a hand move, which like ``Session.move`` may move a pinned macro).  The
  error names the macro and says what to do.
* Other macros, halos and blockages are *not* obstacles: an arrangement may leave the floorplan
  illegal (hand guidance often passes through illegal states); the report's ``legal``,
  ``macro_overlaps`` and the canvas say so.
* ``Arranged.notes`` lists what was adjusted (a pitch rounded to the grid, a group kept inside
  the core).

Examples
--------
>>> from floorwidget import arrange                         # doctest: +SKIP
>>> idx = [design.block(n) for n in ("ram0", "ram1", "ram2")]   # doctest: +SKIP
>>> arrange.align(design, fp, idx, "left").apply(fp)      # doctest: +SKIP
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from .design import (
    FIXED,
    MACRO,
    ORIENTATIONS,
    PINNED,
    Design,
    DesignError,
    Floorplan,
    orient_size,
    snap,
)

__all__ = ["Arranged", "SIDES", "AXES", "EDGES", "align", "array", "distribute", "fit",
           "mirror", "push", "shift"]

#: Sides :func:`align` lines up: edges, or centres on one vertical (``x_centre``) or
#: horizontal (``y_centre``) line.
SIDES = ("left", "right", "bottom", "top", "x_centre", "y_centre")
#: Axes of :func:`distribute` and :func:`mirror`: ``"x"`` along / reflecting x (left-right),
#: ``"y"`` along / reflecting y (bottom-top).
AXES = ("x", "y")
#: Core edges of :func:`push`.
EDGES = ("left", "right", "bottom", "top")

_EPS = 1e-9  # grid steps: slack for values a float rounding away from a grid point


@dataclass(frozen=True)
class Arranged:
    """New positions of arranged macros.

    Attributes
    ----------
    idx : ndarray of int
        Block indices, in the order given.
    x, y : ndarray of float
        New lower-left corners of the oriented footprints, µm (on the grid, inside the core).
    orient : ndarray of int8
        New orientation codes.
    notes : tuple of str
        Adjustments made (empty when the request was taken as asked).
    pitch : (float, float) or None
        For :func:`array`: the distance between neighbouring lower-left corners used, µm
        (the first column and row steps when the steps differ).
    """

    idx: np.ndarray
    x: np.ndarray
    y: np.ndarray
    orient: np.ndarray
    notes: tuple[str, ...] = ()
    pitch: tuple[float, float] | None = None

    def apply(self, fp: Floorplan) -> Floorplan:
        """A copy of ``fp`` with the arranged macros at their new places."""
        new = fp.copy()
        new.x[self.idx], new.y[self.idx], new.orient[self.idx] = self.x, self.y, self.orient
        return new

    def positions(self, design: Design) -> dict[str, tuple[float, float]]:
        """``{name: (x, y)}`` of the arranged macros."""
        return {design.names[i]: (float(a), float(b))
                for i, a, b in zip(self.idx, self.x, self.y)}


# ---------------------------------------------------------------------------------------------
# helpers


def _grid(design: Design) -> tuple[float, float, float, float]:
    (ox, oy), (px, py) = design.grid_origin, design.grid_pitch
    return float(ox), float(oy), float(px), float(py)


def _fit1(v: np.ndarray, size: np.ndarray, lo: float, hi: float, o: float, p: float):
    """Nearest grid point to ``v`` with ``[v, v + size]`` inside ``[lo, hi]`` (vectorised
    ``Session.move`` rule: exactly :func:`~floorwidget.design.snap` where that fits, else the
    first / last grid point that fits, the first when none does)."""
    k = np.round((v - o) / p)
    k_lo = math.ceil((lo - o) / p - _EPS)
    k_hi = np.maximum(np.floor((hi - size - o) / p + _EPS), k_lo)
    kc = np.clip(k, k_lo, k_hi)
    return np.where(kc == k, snap(v, o, p), o + kc * p), kc != k


def fit(design: Design, x, y, w, h) -> tuple[np.ndarray, np.ndarray, bool]:
    """Snap lower-left corners to the placement grid, keeping the footprints ``w × h`` inside
    the core.  Returns ``x, y`` and whether any corner had to be clamped."""
    ox, oy, px, py = _grid(design)
    c = design.core
    nx, cx = _fit1(np.asarray(x, float), np.asarray(w, float), c[0], c[2], ox, px)
    ny, cy = _fit1(np.asarray(y, float), np.asarray(h, float), c[1], c[3], oy, py)
    return nx, ny, bool(cx.any() or cy.any())


def _inside_shift(lo: float, hi: float, clo: float, chi: float, p: float) -> float:
    """A whole number of grid steps that moves ``[lo, hi]`` inside ``[clo, chi]`` (0 when it
    is inside already or cannot fit)."""
    if hi - lo > chi - clo + _EPS * p:
        return 0.0
    if lo < clo - _EPS * p:
        return math.ceil((clo - lo) / p - _EPS) * p
    if hi > chi + _EPS * p:
        return -math.ceil((hi - chi) / p - _EPS) * p
    return 0.0


def _check(design: Design, fp: Floorplan, idx, what: str, least: int = 1,
           pinned_ok: bool = False) -> np.ndarray:
    idx = np.asarray(idx, dtype=np.int64).ravel()
    n = design.num_blocks
    bad = (idx < 0) | (idx >= n)
    if bad.any():
        raise IndexError(f"{what}: block index {int(idx[bad][0])} is not in 0..{n - 1}")
    if len(np.unique(idx)) != len(idx):
        u, c = np.unique(idx, return_counts=True)
        raise DesignError(f"{what}: macro {design.names[int(u[c > 1][0])]!r} is named twice")
    if len(idx) < least:
        raise DesignError(f"{what} needs at least {least} macro{'s' if least > 1 else ''}, "
                          f"got {len(idx)}")
    for i in idx:
        i = int(i)
        if design.kind[i] != MACRO:
            raise DesignError(f"{what}: block {design.names[i]!r} is not a macro (only macros "
                              "are arranged by hand)")
        if fp.status[i] == FIXED:
            raise DesignError(f"{what}: macro {design.names[i]!r} is fixed by the input and "
                              "cannot be moved")
        if fp.status[i] == PINNED and not pinned_ok:
            raise DesignError(f"{what}: macro {design.names[i]!r} is pinned; unpin it first "
                              "(nothing was changed)")
    return idx


def _choice(v, options: Sequence[str], what: str) -> str:
    if v not in options:
        raise DesignError(f"{what} must be one of {', '.join(options)}; got {v!r}")
    return v


def _sizes(design: Design, fp: Floorplan, idx: np.ndarray, orient=None):
    o = fp.orient[idx] if orient is None else orient
    w, h = orient_size(design.width[idx], design.height[idx], o)
    return np.asarray(w, float), np.asarray(h, float)


def _finish(design: Design, fp: Floorplan, idx, x, y, orient=None, notes=(), pitch=None,
            group: bool = False) -> Arranged:
    """Shift a group inside the core (``group``), snap and clamp; the :class:`Arranged`."""
    orient = fp.orient[idx].copy() if orient is None else np.asarray(orient, np.int8)
    w, h = _sizes(design, fp, idx, orient)
    notes = list(notes)
    if group:
        c = design.core
        _, _, px, py = _grid(design)
        dx = _inside_shift(float(x.min()), float((x + w).max()), c[0], c[2], px)
        dy = _inside_shift(float(y.min()), float((y + h).max()), c[1], c[3], py)
        if dx or dy:
            x, y = x + dx, y + dy
            notes.append(f"the group was shifted by ({dx:g}, {dy:g}) µm to stay in the core")
    nx, ny, clamped = fit(design, x, y, w, h)
    if clamped:
        notes.append("some macros were clamped to the core edge")
    return Arranged(idx, nx, ny, orient, tuple(notes), pitch)


# ---------------------------------------------------------------------------------------------
# the arrangements


def align(design: Design, fp: Floorplan, idx, side: str) -> Arranged:
    """Line macros up on one edge or centre line of their bounding box.

    Parameters
    ----------
    design, fp : Design, Floorplan
    idx : sequence of int
        At least two movable macros.
    side : str
        ``"left"`` (all left edges on the leftmost), ``"right"``, ``"bottom"``, ``"top"``
        (on the outermost edge), ``"x_centre"`` (centres on the vertical centre line of the
        group's bounding box) or ``"y_centre"`` (on its horizontal centre line).

    Returns
    -------
    Arranged
        The other coordinate keeps its value (snapped).  After snapping the aligned edges are
        equal exactly when the aligned sides' sizes are whole grid steps (left and bottom
        edges always), else within half a grid step of the line.
    """
    idx = _check(design, fp, idx, "align", 2)
    side = _choice(side, SIDES, "align side")
    w, h = _sizes(design, fp, idx)
    x, y = fp.x[idx].astype(float), fp.y[idx].astype(float)
    if side == "left":
        x = np.full_like(x, x.min())
    elif side == "right":
        x = (x + w).max() - w
    elif side == "bottom":
        y = np.full_like(y, y.min())
    elif side == "top":
        y = (y + h).max() - h
    elif side == "x_centre":
        x = (x.min() + (x + w).max()) / 2 - w / 2
    else:
        y = (y.min() + (y + h).max()) / 2 - h / 2
    return _finish(design, fp, idx, x, y)


def distribute(design: Design, fp: Floorplan, idx, axis: str = "x") -> Arranged:
    """Space macros with equal gaps between neighbours along ``axis``, the outer two staying.

    The macros are taken in the order of their centres along ``axis`` (ties by index); the
    first keeps its left (bottom) edge, the last its right (top) edge, and the free length
    between them is shared equally: gap = (span − Σ sizes) / (n − 1).  A negative gap (the
    macros are longer than the span) makes them overlap, which the report shows.

    After snapping the gaps are equal exactly when the gap and the sizes are whole grid
    steps, else they differ by at most one grid step.
    """
    idx = _check(design, fp, idx, "distribute", 3)
    axis = _choice(axis, AXES, "distribute axis")
    w, h = _sizes(design, fp, idx)
    x, y = fp.x[idx].astype(float), fp.y[idx].astype(float)
    pos, size = (x, w) if axis == "x" else (y, h)
    order = np.lexsort((idx, pos + size / 2))
    p, s = pos[order], size[order]
    lo, hi = p[0], p[-1] + s[-1]
    gap = (hi - lo - s.sum()) / (len(idx) - 1)
    new = np.empty_like(pos)
    new[order] = lo + np.concatenate([[0.0], np.cumsum(s[:-1])]) + np.arange(len(idx)) * gap
    new[order[-1]] = hi - s[-1]  # exactly, not through the running sum
    if axis == "x":
        x = new
    else:
        y = new
    return _finish(design, fp, idx, x, y)


def _pitch_pair(pitch) -> tuple[float | None, float | None]:
    """``(x, y)`` pitches, µm; ``None`` for an axis to abut."""
    if pitch is None or (isinstance(pitch, (int, float, np.integer, np.floating))
                         and not isinstance(pitch, bool)):
        vals = [pitch, pitch]
    else:
        try:
            vals = list(pitch)
        except TypeError:
            vals = []
        if len(vals) != 2:
            raise DesignError(f"array pitch must be a number or a pair (x, y) of numbers, got "
                              f"{pitch!r}")
    out = []
    for v in vals:
        if v is None:
            out.append(None)
            continue
        if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)) \
                or not math.isfinite(float(v)) or float(v) <= 0:
            raise DesignError(f"array pitch must be positive finite µm, got {pitch!r}")
        out.append(float(v))
    return out[0], out[1]


def array(design: Design, fp: Floorplan, idx, rows: int, cols: int, pitch=None) -> Arranged:
    """Pack macros into an array of ``rows × cols`` cells, filled row by row.

    The macros fill the cells in the order given, left to right, the bottom row first; the
    array's lower-left corner is the lower-left corner of the group's bounding box (snapped).

    Parameters
    ----------
    rows, cols : int
        ``rows * cols`` must hold every macro.
    pitch : float or (float or None, float or None), optional
        Distance between the lower-left corners of neighbouring cells, µm (x, y), rounded to
        the nearest whole number of grid steps (at least one).  ``None`` (default, or for one
        axis) abuts the cells under the halo rule (common practice: a halo keeps other macros'
        footprints out, halos may overlap each other): neighbouring columns stand apart by the
        larger of the facing halos — the largest right halo of the left column, the largest
        left halo of the right column — and the column step (widest macro of the column plus
        that gap) is rounded *up* to whole grid steps; rows likewise.

    Returns
    -------
    Arranged
        ``pitch`` is the step used (of the first column and row when they differ).
    """
    idx = _check(design, fp, idx, "array", 1)
    for v, nm in ((rows, "rows"), (cols, "cols")):
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or v < 1:
            raise DesignError(f"array {nm} must be a whole number ≥ 1, got {v!r}")
    rows, cols = int(rows), int(cols)
    n = len(idx)
    if rows * cols < n:
        raise DesignError(f"an array of {rows} × {cols} holds {rows * cols} macros, "
                          f"{n} were given")
    # only the cells the macros fill, and one more on each axis (its facing halo is 0): an
    # array of 10**9 x 10**9 for three macros costs what 1 x 3 costs
    cols = min(cols, n + 1)
    rows = min(rows, -(-n // cols) + 1)
    ox, oy, px, py = _grid(design)
    w, h = _sizes(design, fp, idx)
    r, c = np.arange(n) // cols, np.arange(n) % cols
    notes = []
    want = _pitch_pair(pitch)

    def offsets(key, size, lo_halo, hi_halo, p, m, given):
        if given is not None:  # a pitch: whole grid steps, at least one
            step = max(round(given / p), 1) * p
            if abs(step - given) > _EPS * p:
                notes.append(f"pitch {given:g} µm rounded to the placement grid: {step:g} µm")
            return np.arange(m) * step, step
        big, lo_h, hi_h = np.zeros(m), np.zeros(m), np.zeros(m)
        np.maximum.at(big, key, size)
        np.maximum.at(lo_h, key, lo_halo)
        np.maximum.at(hi_h, key, hi_halo)
        steps = np.ceil((big[:-1] + np.maximum(hi_h[:-1], lo_h[1:])) / p - _EPS) * p
        return np.concatenate([[0.0], np.cumsum(steps)]), float(steps[0]) if m > 1 else 0.0

    halo = design.halo[idx]
    offx, ux = offsets(c, w, halo[:, 0], halo[:, 2], px, cols, want[0])
    offy, uy = offsets(r, h, halo[:, 1], halo[:, 3], py, rows, want[1])
    used = (ux, uy)
    x0 = float(snap(fp.x[idx].min(), ox, px))
    y0 = float(snap(fp.y[idx].min(), oy, py))
    return _finish(design, fp, idx, x0 + offx[c], y0 + offy[r], notes=notes, pitch=used,
                   group=True)


def _mirrored(code: int, axis: str) -> int:
    from .placer.orient import flipped, rotated  # noqa: PLC0415  (the one orientation table)

    f = flipped(code)  # mirror about the vertical axis: MY · M
    if axis == "y":  # MX · M = R180 · MY · M
        f = rotated(rotated(f))
    return f


def mirror(design: Design, fp: Floorplan, idx, axis: str = "x") -> Arranged:
    """Mirror a group about the centre of its bounding box.

    ``axis="x"`` reflects x (left and right change places; each macro mirrored about its
    vertical axis, N↔FN, S↔FS, E↔FE, W↔FW); ``axis="y"`` reflects y (top and bottom change
    places; N↔FS, S↔FN, E↔FW, W↔FE).  Orientations come from
    :func:`floorwidget.placer.orient.flipped` (and :func:`~floorwidget.placer.orient.rotated`
    for the half turn that turns one mirror into the other); a macro whose mirror image is not
    an allowed orientation refuses the whole action.

    Positions are mirrored on the grid, so that mirroring twice gives back the same floorplan
    bit for bit: with lower-left corners at grid steps ``k`` and sizes rounded up to ``m``
    grid steps, the group's extent ``[K0, K1]`` (in steps) is kept and ``k ↦ K0 + K1 − k − m``.
    For sizes that are whole grid steps this is the exact mirror image; otherwise each macro
    lands within one grid step of it, and footprints apart along the axis stay apart.  (A
    group whose extent rounded up to the grid leaves the core is clamped, and then a second
    mirror need not undo the first.)
    """
    idx = _check(design, fp, idx, "mirror", 1)
    axis = _choice(axis, AXES, "mirror axis")
    ox, oy, px, py = _grid(design)
    cur = fp.orient[idx]
    new_o = np.array([_mirrored(int(o), axis) for o in cur], dtype=np.int8)
    for i, o in zip(idx, new_o):
        if not design.orient_allowed[i] >> int(o) & 1:
            allowed = ", ".join(design.allowed_orientations(design.names[i]))
            raise DesignError(f"mirror: macro {design.names[i]!r} would turn "
                              f"{ORIENTATIONS[fp.orient[i]]} → {ORIENTATIONS[o]}, which it does "
                              f"not allow (allowed: {allowed}); nothing was changed")
    w, h = _sizes(design, fp, idx)
    x, y = fp.x[idx].astype(float), fp.y[idx].astype(float)
    if axis == "x":
        o, p, v, s = ox, px, x, w
    else:
        o, p, v, s = oy, py, y, h
    k = np.round((v - o) / p)
    m = np.ceil(s / p - _EPS)
    new = o + (k.min() + (k + m).max() - k - m) * p
    if axis == "x":
        x = new
    else:
        y = new
    return _finish(design, fp, idx, x, y, orient=new_o, group=True)


def push(design: Design, fp: Floorplan, idx, side: str | None = None) -> Arranged:
    """Move a group as one, straight to a core edge, until its footprints touch it.

    ``side=None`` picks the core edge nearest the group's bounding box (ties: left, right,
    bottom, top).  The group keeps its shape (it moves by whole grid steps), halos may reach
    past the core edge into the die margin, and other macros are not obstacles.
    """
    idx = _check(design, fp, idx, "push", 1)
    c = design.core
    w, h = _sizes(design, fp, idx)
    x, y = fp.x[idx].astype(float), fp.y[idx].astype(float)
    gap = {"left": x.min() - c[0], "right": c[2] - (x + w).max(),
           "bottom": y.min() - c[1], "top": c[3] - (y + h).max()}
    side = min(EDGES, key=lambda e: gap[e]) if side is None else \
        _choice(side, EDGES, "push side")
    _, _, px, py = _grid(design)
    if side == "left":
        x = x + math.ceil(-gap["left"] / px - _EPS) * px
    elif side == "right":
        x = x + math.floor(gap["right"] / px + _EPS) * px
    elif side == "bottom":
        y = y + math.ceil(-gap["bottom"] / py - _EPS) * py
    else:
        y = y + math.floor(gap["top"] / py + _EPS) * py
    return _finish(design, fp, idx, x, y, notes=(f"pushed to the {side} core edge",))


def shift(design: Design, fp: Floorplan, idx, dx: float, dy: float) -> Arranged:
    """Move macros by the offset ``(dx, dy)`` µm, as one group (pinned macros too: a hand move).

    Where the group fits in the core and the offset would take it out, it stops at the core
    edge by whole grid steps and keeps its shape.
    """
    idx = _check(design, fp, idx, "shift", 1, pinned_ok=True)
    for v, nm in ((dx, "dx"), (dy, "dy")):
        if isinstance(v, bool) or not isinstance(v, (int, float, np.integer, np.floating)) \
                or not math.isfinite(float(v)):
            raise DesignError(f"shift: {nm} must be a finite number of µm, got {v!r}")
    return _finish(design, fp, idx, fp.x[idx] + float(dx), fp.y[idx] + float(dy), group=True)
