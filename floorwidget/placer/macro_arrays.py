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

from ..design import FIXED, MACRO, MOVABLE, Design, Floorplan, orient_offsets
from ..metrics import routing_supply
from .constraints import macro_keepouts

__all__ = ["ArrayPlan", "array_key", "macro_arrays", "pin_channel", "side_pins"]

_INDEX = re.compile(r"\\?\[\s*\d+\s*\\?\]|(?<=_)\d+(?=$|[./_])|<\d+>")
# Members of one array at most; a larger bank is cut in halves by position.  Smaller arrays
# each go near their own logic: ariane136 with its SRAMs movable (banks of 8 and more; HPWL /
# congestion p99 ÷ the design's own): at most 16 or 8 per array 1.027 / 1.06, 4 0.976 /
# 0.996, 2 1.019 / 1.003 (one run each).
MAX_ARRAY = 4


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


def side_pins(design: Design, fp: Floorplan, idx: np.ndarray) -> np.ndarray:
    """``(len(idx), 4)`` pins of each block on its left, bottom, right and top side, in its
    orientation in ``fp``: a pin belongs to the side its offset is nearest to (relative to
    the half sizes, so a pin on the bottom edge of a tall macro counts there)."""
    idx = np.asarray(idx, dtype=np.intp)
    where = np.full(design.num_blocks, -1, np.intp)
    where[idx] = np.arange(len(idx))
    pins = np.flatnonzero(where[design.pin_block] >= 0)
    b = design.pin_block[pins]
    ox, oy = orient_offsets(design.pin_dx[pins], design.pin_dy[pins], fp.orient[b])
    w, h = fp.sizes()
    hw, hh = np.maximum(w[b] / 2, 1e-12), np.maximum(h[b] / 2, 1e-12)
    side = np.argmax(np.stack([-ox / hw, -oy / hh, ox / hw, oy / hh], axis=1), axis=1)
    out = np.zeros((len(idx), 4), np.int64)
    np.add.at(out, (where[b], side), 1)
    return out


def pin_channel(design: Design, pins: np.ndarray) -> np.ndarray:
    """Room (µm) that ``pins`` (per side: left, bottom, right, top) need on each side of a
    macro or array: every pin's wire takes a track along the channel, so a vertical channel
    (left and right sides) needs ``pins / vertical tracks per µm`` and a horizontal one
    ``pins / horizontal tracks per µm`` (:func:`floorwidget.metrics.routing_supply`).  Two
    facing sides share their channel; the halo rule keeps facing blocks apart by the larger
    of their two halos, so each side asks for twice its own share:
    ``2 × pins / supply`` ≥ ``(pins_a + pins_b) / supply``."""
    sh, sv, _ = routing_supply(design)
    per = np.array([sv, sh, sv, sh])
    return 2.0 * np.asarray(pins, np.float64) / per


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


def slot_order(mem: np.ndarray, cx: np.ndarray, cy: np.ndarray, cols: int) -> np.ndarray:
    """Members in slot order for ``cols`` columns: rows of ``cols`` by their centres' y (the
    bottom row first), each row left to right by x, so the array keeps the order they were
    placed in."""
    by_y = mem[np.argsort(cy[mem], kind="stable")]
    rows = [by_y[s:s + cols] for s in range(0, len(by_y), cols)]
    return np.concatenate([r[np.argsort(cx[r], kind="stable")] for r in rows])


def shape_options(n: int) -> list[tuple[int, int]]:
    """Shapes (rows, cols) an array of ``n`` may take: one row, one column, and two rows or
    two columns -- strips that line the logic rather than blocks that reach into it."""
    half = -(-n // 2)
    return list(dict.fromkeys([(1, n), (n, 1), (2, half) if n > 2 else (1, n),
                               (half, 2) if n > 2 else (n, 1)]))


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
        One MACRO block per array (footprint: the members' bounding box; halo per side: the
        members' own, ``spacing``, or what the pins on that side need, :func:`pin_channel`,
        whichever is largest) then one FIXED block per macro that does not move (footprint
        and halo as in the input); the rows, grid and keep-outs of the input.
    floorplan : Floorplan
        The arrays centred on their members' centroid, on the grid.
    """

    members: list
    rows: np.ndarray
    cols: np.ndarray
    pitch: np.ndarray
    design: Design
    floorplan: Floorplan
    spacing: float
    pins: np.ndarray  # (num_blocks, 4) pins per side of every macro (0 elsewhere)
    member_halo: np.ndarray  # (k, 4) the halo of each array's members
    per_pin: np.ndarray  # (4,) room one pin needs on each side (pin_channel of one pin), µm

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
        cols = np.ones(k, np.int64)
        pitch = np.zeros((k, 2))
        members = []
        for a, mem in enumerate(arrays):
            i = int(mem[0])
            hl = design.halo[i]
            px = np.ceil((w[i] + max(hl[0], hl[2])) / gx - 1e-9) * gx
            py = np.ceil((h[i] + max(hl[1], hl[3])) / gy - 1e-9) * gy
            if shapes is not None:
                c = shapes[a][1]
            else:
                sx = max(float(np.ptp(cx[mem])), px)
                sy = max(float(np.ptp(cy[mem])), py)
                c = _shape(len(mem), px, py, sy / sx)[1]
            members.append(slot_order(mem, cx, cy, c))
            cols[a] = c
            pitch[a] = px, py
        stay = np.flatnonzero((design.kind == MACRO) & (fp.status != MOVABLE))
        names = [f"array{a}" for a in range(k)] + [design.names[i] for i in stay]
        n = len(names)
        first = np.array([int(m[0]) for m in members], np.intp)
        width = np.concatenate([w[first], w[stay]])
        height = np.concatenate([h[first], h[stay]])
        halo = np.concatenate([design.halo[first], design.halo[stay]])
        rows_d = {"x": design.row_x, "y": design.row_y, "height": design.row_height,
                  "site_width": design.row_site_width, "num_sites": design.row_num_sites,
                  "orient": design.row_orient}
        status = np.concatenate([np.full(k, MOVABLE, np.int8),
                                 np.full(len(stay), FIXED, np.int8)])
        small = Design(f"{design.name}:arrays", design.die, names, np.full(n, MACRO, np.int8),
                       width, height, np.zeros(1, np.int64), np.zeros(0, np.int64),
                       np.zeros(0), np.zeros(0), halo=halo,
                       orient_allowed=np.ones(n, np.uint8), rows=rows_d,
                       grid_pitch=design.grid_pitch, grid_origin=design.grid_origin,
                       blockages=macro_keepouts(design), x=np.zeros(n), y=np.zeros(n),
                       status=status, validate=False)
        small.initial.x[k:], small.initial.y[k:] = fp.x[stay], fp.y[stay]
        mac = np.flatnonzero(design.kind == MACRO)
        pins = np.zeros((design.num_blocks, 4), np.int64)
        pins[mac] = side_pins(design, fp, mac)
        plan = cls(members, np.ones(k, np.int64), cols, pitch, small, small.initial, spacing,
                   pins, design.halo[first].copy(), pin_channel(design, np.ones(4)))
        for a in range(k):
            plan._size(a, w[first[a]], h[first[a]])
        g0 = design.grid_origin
        sfp = plan.floorplan
        for a, mem in enumerate(members):
            sfp.x[a] = g0[0] + np.round((np.mean(cx[mem]) - small.width[a] / 2 - g0[0]) / gx) * gx
            sfp.y[a] = g0[1] + np.round((np.mean(cy[mem]) - small.height[a] / 2 - g0[1]) / gy) \
                * gy
        return plan

    def _size(self, a: int, mw: float, mh: float) -> None:
        """Footprint and halo of array ``a`` in its current shape, from one member's
        footprint ``mw × mh``: the halo per side is the largest of the members' own,
        :attr:`spacing` and :func:`pin_channel` of the pins on that side of the array."""
        mem = self.members[a]
        n, c = len(mem), int(self.cols[a])
        r = -(-n // c)
        self.rows[a] = r
        slot = np.arange(n)
        col, row = slot % c, slot // c
        last_row = n - (r - 1) * c  # members in the top row
        outer = [col == 0, row == 0, (col == c - 1) | (slot == n - 1),
                 (row == r - 1) | ((row == r - 2) & (col >= last_row))]
        pins = np.array([self.pins[mem[m], s].sum() for s, m in enumerate(outer)])
        d = self.design
        d.width[a] = (c - 1) * self.pitch[a, 0] + mw
        d.height[a] = (r - 1) * self.pitch[a, 1] + mh
        d.halo[a] = np.maximum(np.maximum(self.member_halo[a], self.spacing),
                               pins * self.per_pin)

    def reshape(self, a: int, cols: int, cx: np.ndarray, cy: np.ndarray) -> None:
        """Array ``a`` with ``cols`` columns (slots ordered by the centres ``cx, cy``)."""
        mw, mh = self.member_size(a)
        self.members[a] = slot_order(self.members[a], cx, cy, cols)
        self.cols[a] = cols
        self._size(a, mw, mh)

    def member_size(self, a: int) -> np.ndarray:
        """Footprint of one member of array ``a`` (all are alike), µm."""
        d = self.design
        c, r = int(self.cols[a]), int(self.rows[a])
        return np.array([d.width[a] - (c - 1) * self.pitch[a, 0],
                         d.height[a] - (r - 1) * self.pitch[a, 1]])

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
