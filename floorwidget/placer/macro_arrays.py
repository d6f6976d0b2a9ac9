"""Arrays of identical macros: found, shaped and placed as one block each.

Common practice (no single source) keeps the memories of one bank — the same master under the
same hierarchy parent, told apart only by an index (``mem[0] … mem[7]``) — together as an
array: abutted under the halo rule, pins toward the logic, with routing channels between
arrays rather than between their members.  Grouping hard macros by connectivity and hierarchy
before they are arranged is also what Kahng, Varadarajan, Wang (ISPD 2022) do for large macro
counts.

* :func:`array_key` — a macro's name with its last index replaced: the bank it belongs to.
* :func:`macro_arrays` — the movable macros split into arrays (same master or size in their
  orientation, same halo, same bank), large ones cut by position into parts of at most
  ``max_size``.
* :func:`ArrayPlan` — each array as one rectangle: rows and columns chosen from the spread of
  its members in the global placement, the members' slots ordered as they were placed, and a
  small design of the rectangles on which the macro legaliser and the periphery packing work
  unchanged.

The results are early-floorplanning estimates; sign-off belongs to the implementation flow.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from ..design import FIXED, MACRO, MOVABLE, Design, Floorplan
from .constraints import macro_keepouts

__all__ = ["ArrayPlan", "array_key", "macro_arrays"]

_INDEX = re.compile(r"\\?\[\s*\d+\s*\\?\]|(?<=_)\d+(?=$|[./_])|<\d+>")
MAX_ARRAY = 16  # members of one array at most; a larger bank is cut by position


def array_key(name: str) -> str:
    """The bank of a macro: its name with the *last* index (``[3]``, ``\\[3\\]``, ``<3>`` or a
    ``_3`` component) replaced by ``*``; a name without an index is its own bank.

    >>> array_key(r"cache_blk\\[1\\].data_mem\\[3\\].i_ram")
    'cache_blk\\\\[1\\\\].data_mem*.i_ram'
    >>> array_key("ram_7"), array_key("pll")
    ('ram_*', 'pll')
    """
    last = None
    for m in _INDEX.finditer(name):
        last = m
    if last is None:
        return name
    return name[:last.start()] + "*" + name[last.end():]


def _bisect(members: np.ndarray, x: np.ndarray, y: np.ndarray, max_size: int) -> list:
    """``members`` cut in two along the axis of wider spread until no part has more than
    ``max_size`` (parts of even size, so a bank of 32 gives four arrays of 8)."""
    if len(members) <= max_size:
        return [members]
    xs, ys = x[members], y[members]
    key = xs if np.ptp(xs) >= np.ptp(ys) else ys
    order = members[np.argsort(key, kind="stable")]
    half = len(order) // 2
    return _bisect(order[:half], x, y, max_size) + _bisect(order[half:], x, y, max_size)


def macro_arrays(design: Design, fp: Floorplan, macros: np.ndarray,
                 max_size: int = MAX_ARRAY) -> list[np.ndarray]:
    """The movable macros ``macros`` as arrays of identical macros.

    Two macros are in one array when they have the same master (``design.block_type``; the
    footprint where there is none) and footprint in their current orientation, the same halo,
    and the same :func:`array_key`.  Parts larger than ``max_size`` are cut by position
    (:func:`_bisect`).  Every macro is in exactly one array; a macro without peers is an array
    of one.  Arrays come in the order of their first member.
    """
    macros = np.asarray(macros, dtype=np.intp)
    w, h = fp.sizes()
    cx, cy = fp.centres()
    types = design.block_type
    groups: dict[tuple, list[int]] = {}
    for i in macros.tolist():
        master = types[i] if types is not None else ""
        key = (master, round(w[i], 6), round(h[i], 6), tuple(np.round(design.halo[i], 6)),
               array_key(design.names[i]))
        groups.setdefault(key, []).append(i)
    out: list[np.ndarray] = []
    for mem in groups.values():
        out.extend(_bisect(np.array(mem, dtype=np.intp), cx, cy, max_size))
    return out


def _shape(n: int, pitch_x: float, pitch_y: float, aspect: float) -> tuple[int, int]:
    """Rows and columns of an array of ``n`` members whose bounding box is closest (in log
    ratio) to ``aspect`` = height / width of the members' spread; no empty row."""
    best, shape = np.inf, (1, n)
    for rows in range(1, n + 1):
        cols = -(-n // rows)
        if (rows - 1) * cols >= n:
            continue
        a = (rows * pitch_y) / (cols * pitch_x)
        score = abs(np.log(a / aspect))
        if score < best - 1e-12:
            best, shape = score, (rows, cols)
    return shape


@dataclass
class ArrayPlan:
    """Arrays as rectangles on a design of their own.

    Attributes
    ----------
    members : list of int arrays
        Macros of each array, in slot order (row by row, left to right, bottom row first).
    rows, cols : int arrays
        Shape of each array.
    pitch : (k, 2) array
        Distance between neighbouring members' lower-left corners, µm (on the grid).
    design : Design
        One MACRO block per array (footprint: the members' bounding box; halo: ``spacing``
        where that exceeds the members' own) then one FIXED block per macro that does not
        move (footprint and halo as in the input); the rows, grid and keep-outs of the input.
    floorplan : Floorplan
        The arrays centred on their members' centroid, on the grid.
    """

    members: list
    rows: np.ndarray
    cols: np.ndarray
    pitch: np.ndarray
    design: Design
    floorplan: Floorplan

    @classmethod
    def build(cls, design: Design, fp: Floorplan, arrays: list, spacing: float,
              shapes: list | None = None) -> ArrayPlan:
        """Shape every array from the spread of its members in ``fp`` (or ``shapes``, a list
        of ``(rows, cols)``) and lay the rectangles on a small design.  ``spacing`` is the
        least distance between two arrays (their halos), µm."""
        w, h = fp.sizes()
        cx, cy = fp.centres()
        gx, gy = design.grid_pitch
        k = len(arrays)
        rows, cols = np.ones(k, np.int64), np.ones(k, np.int64)
        pitch = np.zeros((k, 2))
        aw, ah, ahalo = np.zeros(k), np.zeros(k), np.zeros((k, 4))
        members = []
        for a, mem in enumerate(arrays):
            i = int(mem[0])
            hl = design.halo[i]
            px = np.ceil((w[i] + max(hl[0], hl[2])) / gx - 1e-9) * gx
            py = np.ceil((h[i] + max(hl[1], hl[3])) / gy - 1e-9) * gy
            if shapes is not None:
                r, c = shapes[a]
            else:
                sx = max(float(np.ptp(cx[mem])), px)
                sy = max(float(np.ptp(cy[mem])), py)
                r, c = _shape(len(mem), px, py, sy / sx)
            # slots: rows by the members' global y, each row left to right by x
            by_y = mem[np.argsort(cy[mem], kind="stable")]
            slots = [row[np.argsort(cx[row], kind="stable")]
                     for row in np.array_split(by_y, r) if len(row)]
            members.append(np.concatenate(slots))
            rows[a], cols[a] = len(slots), max(len(s) for s in slots)
            pitch[a] = px, py
            aw[a] = (cols[a] - 1) * px + w[i]
            ah[a] = (rows[a] - 1) * py + h[i]
            ahalo[a] = np.maximum(hl, spacing)
        stay = np.flatnonzero((design.kind == MACRO) & (fp.status != MOVABLE))
        names = [f"array{a}" for a in range(k)] + [design.names[i] for i in stay]
        n = len(names)
        kinds = np.full(n, MACRO, np.int8)
        sw, sh = fp.sizes()
        width = np.concatenate([aw, sw[stay]])
        height = np.concatenate([ah, sh[stay]])
        halo = np.concatenate([ahalo, design.halo[stay]])
        cxa = np.array([np.mean(cx[m]) for m in members]) if k else np.zeros(0)
        cya = np.array([np.mean(cy[m]) for m in members]) if k else np.zeros(0)
        x = np.concatenate([cxa - aw / 2, fp.x[stay]])
        y = np.concatenate([cya - ah / 2, fp.y[stay]])
        status = np.concatenate([np.full(k, MOVABLE, np.int8), np.full(len(stay), FIXED,
                                                                      np.int8)])
        orient = np.zeros(n, np.int8)
        orient[k:] = 0  # footprints of the fixed ones are given in place (sizes above)
        rows_d = {"x": design.row_x, "y": design.row_y, "height": design.row_height,
                  "site_width": design.row_site_width, "num_sites": design.row_num_sites,
                  "orient": design.row_orient}
        small = Design(f"{design.name}:arrays", design.die, names, kinds, width, height,
                       np.zeros(1, np.int64), np.zeros(0, np.int64), np.zeros(0), np.zeros(0),
                       halo=halo, orient_allowed=np.ones(n, np.uint8), rows=rows_d,
                       grid_pitch=design.grid_pitch, grid_origin=design.grid_origin,
                       blockages=macro_keepouts(design), x=x, y=y, orient=orient,
                       status=status, validate=False)
        sfp = small.initial
        g0 = design.grid_origin
        sfp.x[:k] = g0[0] + np.round((sfp.x[:k] - g0[0]) / gx) * gx
        sfp.y[:k] = g0[1] + np.round((sfp.y[:k] - g0[1]) / gy) * gy
        return cls(members, rows, cols, pitch, small, sfp)

    def expand(self, fp: Floorplan, arranged: Floorplan) -> Floorplan:
        """The macros of ``fp`` moved to their slots in the arrays as ``arranged`` (a
        floorplan of :attr:`design`) has them; everything else as in ``fp``."""
        out = fp.copy()
        for a, mem in enumerate(self.members):
            c = int(self.cols[a])
            slot = np.arange(len(mem))
            out.x[mem] = arranged.x[a] + (slot % c) * self.pitch[a, 0]
            out.y[mem] = arranged.y[a] + (slot // c) * self.pitch[a, 1]
        return out
