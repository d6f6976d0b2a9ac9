"""The design's vocabulary: block kind, status and region codes, the eight LEF/DEF orientations
and the transforms that map footprints and pin offsets through them (the only place that knows
them), limits, the snap-grid rule, and :class:`DesignError`.

The orientation matrices follow the LEF/DEF language reference: N = R0, S = R180, W = R90
(counter-clockwise), E = R270, FN = MY, FS = MX, FW = MX90, FE = MY90, where the flipped forms are
the unflipped rotation followed by a mirror through the y axis.  Everything here is importable
from :mod:`floorwidget.design` too.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

import numpy as np

__all__ = [
    "ALL_ORIENTS", "CELL", "CLUSTER", "COORD_LIMIT", "FENCE", "FIXED", "GUIDE", "KIND_NAMES",
    "MACRO", "MAX_SITES", "MOVABLE", "ORIENT_CODE", "ORIENTATIONS", "PINNED", "REGION_TYPES",
    "STATUS_NAMES", "TERMINAL", "DesignError", "off_grid", "orient_mask", "orient_offsets",
    "orient_size", "snap",
]

# ---------------------------------------------------------------------------------------------
# codes

MACRO, CLUSTER, CELL, TERMINAL = 0, 1, 2, 3
KIND_NAMES = ("macro", "cluster", "cell", "terminal")

MOVABLE, PINNED, FIXED = 0, 1, 2
STATUS_NAMES = ("movable", "pinned", "fixed")

FENCE, GUIDE = 0, 1
REGION_TYPES = ("fence", "guide")  # DEF REGIONS + TYPE FENCE | GUIDE

ORIENTATIONS = ("N", "S", "E", "W", "FN", "FS", "FE", "FW")
ORIENT_CODE = {o: i for i, o in enumerate(ORIENTATIONS)}
ALL_ORIENTS = 0xFF  # bitmask with every orientation allowed

COORD_LIMIT = 1e9  # µm (a kilometre): larger coordinates, sizes and weights are refused
MAX_SITES = 2**31 - 1  # sites in one row

# 2x2 matrices acting on centre offsets, indexed by orientation code (see module docstring).
_ORIENT_MAT = np.array(
    [
        [[1, 0], [0, 1]],  # N   R0
        [[-1, 0], [0, -1]],  # S   R180
        [[0, 1], [-1, 0]],  # E   R270: (x, y) -> (y, -x)
        [[0, -1], [1, 0]],  # W   R90:  (x, y) -> (-y, x)
        [[-1, 0], [0, 1]],  # FN  MY:   (x, y) -> (-x, y)
        [[1, 0], [0, -1]],  # FS  MX:   (x, y) -> (x, -y)
        [[0, -1], [-1, 0]],  # FE  MY90: (x, y) -> (-y, -x)
        [[0, 1], [1, 0]],  # FW  MX90: (x, y) -> (y, x)
    ],
    dtype=np.float64,
)
_SWAPS = np.array([False, False, True, True, False, False, True, True])


class DesignError(ValueError):
    """Bad input or an inconsistent design.

    Parameters
    ----------
    message : str
        What is wrong, in one line.
    file, line : optional
        Where; ``str(err)`` then reads ``file:line: message``.
    problems : list of str, optional
        Every problem found, when validation collected several.
    where : str, optional
        The object at fault when there is no line to name (a JSON path such as
        ``blocks[3].width``, ``block 'ram0'``, ``row 2``); validation sets it to the object of
        the first problem.  It is part of ``message`` already.
    """

    def __init__(self, message: str, file: str | None = None, line: int | None = None,
                 problems: Sequence[str] | None = None, where: str | None = None):
        self.message = message
        self.file = None if file is None else str(file)
        self.line = line
        self.where = where
        self.problems = list(problems) if problems else [message]
        where = ""
        if self.file is not None:
            where = f"{self.file}:{line}: " if line is not None else f"{self.file}: "
        super().__init__(where + message)


# ---------------------------------------------------------------------------------------------
# orientation: the one place that owns the eight transforms


def orient_mask(orients: Iterable[str]) -> int:
    """Bitmask of allowed orientations from their names (``{"N", "FS"}`` -> ``0b100001``)."""
    m = 0
    for o in orients:
        if o not in ORIENT_CODE:
            raise DesignError(f"unknown orientation {o!r} "
                              f"(expected one of {', '.join(ORIENTATIONS)})")
        m |= 1 << ORIENT_CODE[o]
    return m


def orient_size(width, height, orient):
    """Footprint ``(w, h)`` after orientation: E, W, FE and FW swap width and height."""
    swap = _SWAPS[np.asarray(orient, dtype=np.intp)]
    return np.where(swap, height, width), np.where(swap, width, height)


def orient_offsets(dx, dy, orient):
    """Map centre offsets ``(dx, dy)`` given in the N orientation through ``orient`` (codes).

    Examples
    --------
    >>> orient_offsets(1.0, 2.0, ORIENT_CODE["W"])   # R90 counter-clockwise
    (array(-2.), array(1.))
    """
    m = _ORIENT_MAT[np.asarray(orient, dtype=np.intp)]
    dx = np.asarray(dx, dtype=np.float64)
    dy = np.asarray(dy, dtype=np.float64)
    return m[..., 0, 0] * dx + m[..., 0, 1] * dy, m[..., 1, 0] * dx + m[..., 1, 1] * dy


# ---------------------------------------------------------------------------------------------
# the snap grid


def snap(values, origin: float, pitch: float):
    """Round ``values`` to the nearest grid line ``origin + k * pitch``."""
    return origin + np.round((np.asarray(values, dtype=np.float64) - origin) / pitch) * pitch


def off_grid(values, origin: float, pitch: float, tol: float = 1e-6) -> np.ndarray:
    """Mask of values not on the grid ``origin + k * pitch`` (within ``tol`` µm)."""
    v = np.asarray(values, dtype=np.float64)
    return np.abs(snap(v, origin, pitch) - v) > tol + 1e-12 * np.abs(v)
