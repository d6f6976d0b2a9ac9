"""The netlist and its geometry, as numpy struct-of-arrays, and the mutable :class:`Floorplan`.

Conventions (see DEVELOPERS.md):

* Units are micrometres as ``float64``.  Database units appear only at the LEF/DEF boundary
  (``Design.dbu`` remembers the input's resolution so that DEF export can write integers).
* A block's position is the **lower-left corner of its footprint after orientation**, which is
  how DEF places components.
* Pin offsets ``pin_dx``/``pin_dy`` are measured from the **block centre in the N orientation**
  (Bookshelf's convention).  :func:`orient_offsets` is the one function that maps them, and the
  footprint, through the eight LEF/DEF orientations.

The orientation matrices follow the LEF/DEF language reference: N = R0, S = R180, W = R90
(counter-clockwise), E = R270, FN = MY, FS = MX, FW = MX90, FE = MY90, where the flipped forms are
the unflipped rotation followed by a mirror through the y axis.
"""

from __future__ import annotations

import warnings
from collections import Counter
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np

from .kernels.power import PowerShapes
from .kernels.rects import clip
from .kernels.sweep import overlapping_pair

__all__ = [
    "CELL",
    "CLUSTER",
    "FIXED",
    "KIND_NAMES",
    "MACRO",
    "MOVABLE",
    "ORIENTATIONS",
    "ORIENT_CODE",
    "PINNED",
    "STATUS_NAMES",
    "TERMINAL",
    "ALL_ORIENTS",
    "COORD_LIMIT",
    "FENCE",
    "GUIDE",
    "MAX_SITES",
    "REGION_TYPES",
    "CellRegions",
    "Design",
    "DesignError",
    "Floorplan",
    "orient_mask",
    "orient_offsets",
    "orient_size",
    "off_grid",
    "snap",
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
# cell regions: rectangles that groups of standard cells and clusters must stay in or lean to


@dataclass(frozen=True, eq=False)
class CellRegions:
    """Named regions (DEF ``REGIONS``) and the blocks assigned to them (DEF ``GROUPS``).

    A *fence* keeps its members inside its rectangles and every other cell out; a *guide*
    pulls its members toward them and lets them spill.  Only standard cells and soft clusters
    are members (macros are placed by their own rules).  Not to be confused with the report's
    ``logic_regions`` (the free areas between macros).

    Attributes
    ----------
    names : tuple of str
        Region names, unique.
    kind : (r,) int8
        :data:`FENCE` or :data:`GUIDE`.
    rect_start : (r + 1,) int64
        CSR index: the rectangles of region ``k`` are ``rects[rect_start[k]:rect_start[k+1]]``
        (at least one; they do not overlap each other).
    rects : (m, 4) float64
        ``xlo, ylo, xhi, yhi``, µm.
    member : (n,) int32
        Region of each block, -1 for none.
    groups : tuple of str
        The DEF ``GROUPS`` name that assigns each region its members (default: its name).
    """

    names: tuple
    kind: np.ndarray
    rect_start: np.ndarray
    rects: np.ndarray
    member: np.ndarray
    groups: tuple

    @classmethod
    def empty(cls, n: int) -> CellRegions:
        return cls((), np.zeros(0, np.int8), np.zeros(1, np.int64), np.zeros((0, 4)),
                   np.full(n, -1, np.int32), ())

    @classmethod
    def build(cls, n: int, regions: Sequence[dict], member=None) -> CellRegions:
        """From ``[{"name", "type": "fence"|"guide", "rects": [[..4..], ..], "group"}]`` and a
        ``(n,)`` member array (default: none)."""
        names = tuple(str(r["name"]) for r in regions)
        kind = np.array([REGION_TYPES.index(r.get("type", "fence")) for r in regions],
                        dtype=np.int8)
        counts = [len(r["rects"]) for r in regions]
        rects = np.array([b for r in regions for b in r["rects"]], dtype=np.float64)
        groups = tuple(str(r.get("group") or r["name"]) for r in regions)
        mem = np.full(n, -1, np.int32) if member is None else np.asarray(member, np.int32)
        return cls(names, kind, np.concatenate([[0], np.cumsum(counts)]).astype(np.int64),
                   rects.reshape(-1, 4), mem.reshape(n), groups)

    def __len__(self) -> int:
        return len(self.names)

    def __eq__(self, other) -> bool:
        return isinstance(other, CellRegions) and self.names == other.names \
            and self.groups == other.groups and all(
                np.array_equal(getattr(self, a), getattr(other, a))
                for a in ("kind", "rect_start", "rects", "member"))

    __hash__ = None  # type: ignore[assignment]  # mutable arrays inside

    def index(self, name: str) -> int:
        """Index of region ``name``; :class:`DesignError` naming it when unknown."""
        try:
            return self.names.index(name)
        except ValueError:
            known = ", ".join(map(repr, self.names)) or "none"
            raise DesignError(f"region {name!r}: no such cell region (known: {known})",
                              where=f"region {name!r}") from None

    def rects_of(self, k: int) -> np.ndarray:
        return self.rects[self.rect_start[k]:self.rect_start[k + 1]]

    def members(self, k: int) -> np.ndarray:
        return np.flatnonzero(self.member == k)

    def rect_region(self) -> np.ndarray:
        """Region index of every rectangle."""
        return np.repeat(np.arange(len(self.names)), np.diff(self.rect_start))

    def to_list(self) -> list[dict]:
        """Plain description (as :meth:`build` takes), members not included."""
        return [{"name": nm, "type": REGION_TYPES[int(self.kind[k])],
                 "rects": self.rects_of(k).tolist(), "group": self.groups[k]}
                for k, nm in enumerate(self.names)]

    def problems(self, design: Design) -> list[tuple[str, str]]:
        """``(object, message)`` of every problem, each naming the region or block."""
        out: list[tuple[str, str]] = []
        r = len(self.names)
        if len(set(self.names)) != r or not all(self.names):
            dup = [k for k, c in Counter(self.names).items() if c > 1 or not k]
            out.append((f"region {dup[0]!r}", f"region {dup[0]!r}: region names must be "
                                              "unique and not empty"))
        rs = self.rect_start
        if len(rs) != r + 1 or rs[0] != 0 or rs[-1] != len(self.rects) \
                or (np.diff(rs) < 1).any() or ((self.kind != FENCE) & (self.kind != GUIDE)).any():
            out.append(("regions", "cell regions: every region needs a type and at least one "
                                   "rectangle"))
            return out
        b = self.rects
        with np.errstate(invalid="ignore"):
            bad = ~(np.abs(b) <= COORD_LIMIT).all(axis=1) | ~((b[:, 2] > b[:, 0])
                                                              & (b[:, 3] > b[:, 1]))
        if bad.any():
            nm = self.names[int(self.rect_region()[np.flatnonzero(bad)[0]])]
            out.append((f"region {nm!r}", f"region {nm!r}: a rectangle is not finite or has "
                                          "no area"))
            return out
        die = design.die
        tol = 1e-6 + 1e-9 * np.abs(die).max(initial=0.0)
        outside = (b[:, 0] < die[0] - tol) | (b[:, 1] < die[1] - tol) \
            | (b[:, 2] > die[2] + tol) | (b[:, 3] > die[3] + tol)
        if outside.any():
            k = int(np.flatnonzero(outside)[0])
            nm = self.names[int(self.rect_region()[k])]
            out.append((f"region {nm!r}", f"region {nm!r}: rectangle {b[k].tolist()} reaches "
                                          f"outside the die {die.tolist()}"))
        # the rectangles of one region must not overlap (rows are cut to their union), nor
        # those of two fences (a cell cannot be kept inside one fence and out of the other);
        # guides may overlap other regions.  One sweep, not all pairs.
        reg = self.rect_region()
        pair = overlapping_pair(b, reg)
        if pair is not None:
            i, j = pair
            a = self.names[int(reg[i])]
            out.append((f"region {a!r}", f"region {a!r}: its rectangles overlap "
                                         f"({b[i].tolist()} and {b[j].tolist()})"))
        fence = np.flatnonzero(self.kind[reg] == FENCE)
        pair = None if pair is not None else overlapping_pair(b[fence])
        if pair is not None:
            i, j = fence[list(pair)]
            a, c = self.names[int(reg[i])], self.names[int(reg[j])]
            out.append((f"region {a!r}", f"fences {a!r} and {c!r} overlap (rectangles "
                                         f"{b[i].tolist()} and {b[j].tolist()}): fences must "
                                         "not share area"))
        m = self.member
        if m.shape != (design.num_blocks,) or ((m < -1) | (m >= r)).any():
            out.append(("regions", "cell regions: a member names no region"))
            return out
        wrong = (m >= 0) & (design.kind != CELL) & (design.kind != CLUSTER)
        if wrong.any():
            nm = design.names[int(np.flatnonzero(wrong)[0])]
            out.append((f"block {nm!r}", f"block {nm!r}: only standard cells and clusters "
                                         "belong to cell regions"))
        return out


# ---------------------------------------------------------------------------------------------


def _f64(a, shape=None) -> np.ndarray:
    a = np.ascontiguousarray(a, dtype=np.float64)
    if shape is not None:
        a = a.reshape(shape)
    return a


class Design:
    """An immutable-by-convention netlist with geometry.

    Parameters
    ----------
    name : str
        Design name.
    die : (xlo, ylo, xhi, yhi)
        Die outline, µm.
    names, kind, width, height : sequences of length n
        Block names, kind codes (:data:`MACRO`, :data:`CLUSTER`, :data:`CELL`, :data:`TERMINAL`),
        footprint in the N orientation.
    net_start, pin_block, pin_dx, pin_dy : arrays
        Nets in CSR form: the pins of net ``k`` are ``net_start[k]:net_start[k+1]``; each pin
        names its block and its offset from the block centre in the N orientation.
    halo : (n, 4) array, optional
        Keep-out margin left, bottom, right, top of the placed footprint (not rotated).
    orient_allowed : (n,) uint8 bitmask, optional
        Allowed orientations (default: all eight for macros, N only for others).
    net_names, net_weight, pin_names : optional
    rows : dict of arrays ``x, y, height, site_width, num_sites`` (and ``orient``), optional
        Placement rows; the core area is their bounding box (the die when there are none).
    grid_pitch, grid_origin : (2,), optional
        Snap grid for macros (default: site width by row height from the origin of the rows).
    blockages : (k, 4) array, optional
        Placement blockages ``xlo, ylo, xhi, yhi``.
    blockage_max_density : (k,) array, optional
        Per blockage, the largest share of its area standard cells and clusters may fill:
        0.0 (the default) is a full blockage, which keeps macros out too; a value in (0, 1]
        is a partial one (DEF ``+ PARTIAL`` with the percentage ÷ 100), which only caps the
        density under it.
    regions : CellRegions, optional
        Fence and guide regions for groups of cells (DEF ``REGIONS`` and ``GROUPS``).
    block_type : list of str, optional
        Master (library cell) name per block, for DEF export.
    x, y, orient, status : arrays, optional
        Initial placement from the input; :attr:`initial` holds it as a :class:`Floorplan`.
    dbu : int
        Database units per µm remembered for DEF export.
    lef_files : list of str
        The LEF libraries a DEF design was read with (empty otherwise); DEF export refers to
        them instead of writing abstracts of its own.
    def_source : DefSource or None
        Set by the DEF reader: the source text and the state it described, so that DEF export
        writes back only what changed (:mod:`floorwidget.formats.lefdef.writeback`).
    validate : bool
        Run :meth:`validate` (raising :class:`DesignError` listing every problem).
    """

    def __init__(self, name: str, die, names: Sequence[str], kind, width, height,
                 net_start, pin_block, pin_dx, pin_dy, *, halo=None, orient_allowed=None,
                 net_names: Sequence[str] | None = None, net_weight=None,
                 pin_names: Sequence[str] | None = None, rows: dict | None = None,
                 grid_pitch=None, grid_origin=None, blockages=None, blockage_max_density=None,
                 regions: CellRegions | None = None, block_type: Sequence[str] | None = None,
                 x=None, y=None, orient=None, status=None, dbu: int = 1000,
                 validate: bool = True, source: str | None = None):
        self.name = str(name)
        self.source = source
        self.lef_files: list[str] = []
        #: Routing layers ``(name, "H" | "V", pitch µm)`` from the LEF or the DEF TRACKS; the
        #: congestion figures divide routing demand by their supply (empty: an assumed stack,
        #: :func:`floorwidget.metrics.routing_supply`).
        self.routing_layers: list[tuple[str, str, float]] = []
        #: Layer of each I/O terminal's shape where the input says (DEF ``PINS + LAYER``),
        #: by terminal name; :mod:`floorwidget.floorplan.pins` puts the others on a default.
        self.io_layers: dict[str, str] = {}
        #: Signal direction of each I/O terminal where the input says (Verilog port
        #: declarations, DEF ``PINS + DIRECTION``): INPUT, OUTPUT, INOUT or FEEDTHRU.
        self.io_directions: dict[str, str] = {}
        #: DEF ``TRACKS`` a floorplan made from a netlist writes (``floorplan.init.Track``:
        #: axis, start µm, count, step µm, layer); empty for designs read from files.
        self.tracks: list = []
        self.def_source = None  # formats.lefdef.source.DefSource of a design read from DEF
        self.dbu = int(dbu)
        self.die = _f64(die, (4,))
        self.names = list(names)
        n = len(self.names)
        self.kind = np.ascontiguousarray(kind, dtype=np.int8).reshape(n)
        self.width = _f64(width, (n,))
        self.height = _f64(height, (n,))
        self.halo = np.zeros((n, 4)) if halo is None else _f64(halo, (n, 4))
        if orient_allowed is None:
            orient_allowed = np.where(self.kind == MACRO, ALL_ORIENTS, 1)
        self.orient_allowed = np.ascontiguousarray(orient_allowed, dtype=np.uint8).reshape(n)
        self.block_type = list(block_type) if block_type is not None else None

        self.net_start = np.ascontiguousarray(net_start, dtype=np.int64)
        self.pin_block = np.ascontiguousarray(pin_block, dtype=np.int64)
        self.pin_dx = _f64(pin_dx)
        self.pin_dy = _f64(pin_dy)
        m = len(self.net_start) - 1
        self.net_names = list(net_names) if net_names is not None else [f"n{i}" for i in range(m)]
        self.net_weight = np.ones(m) if net_weight is None else _f64(net_weight, (m,))
        self.pin_names = list(pin_names) if pin_names is not None else None

        rows = rows or {}
        self.row_x = _f64(rows.get("x", ()))
        self.row_y = _f64(rows.get("y", ()))
        self.row_height = _f64(rows.get("height", ()))
        self.row_site_width = _f64(rows.get("site_width", ()))
        self.row_num_sites = np.ascontiguousarray(rows.get("num_sites", ()), dtype=np.int64)
        self.row_orient = np.ascontiguousarray(
            rows.get("orient", np.zeros(len(self.row_x))), dtype=np.int8)
        self.site_name = str(rows.get("site_name", "core"))
        if len(self.row_x):
            xhi = self.row_x + self.row_site_width * self.row_num_sites
            self.core = np.array([self.row_x.min(), self.row_y.min(), xhi.max(),
                                  (self.row_y + self.row_height).max()])
        else:
            self.core = self.die.copy()
        if grid_pitch is None:
            grid_pitch = ((float(self.row_site_width[0]), float(self.row_height[0]))
                          if len(self.row_x) else (0.001, 0.001))
        self.grid_pitch = _f64(grid_pitch, (2,))
        self.grid_origin = _f64(self.core[:2] if grid_origin is None else grid_origin, (2,))
        self.blockages = np.zeros((0, 4)) if blockages is None else _f64(blockages, (-1, 4))
        self.blockage_max_density = (np.zeros(len(self.blockages))
                                     if blockage_max_density is None
                                     else _f64(blockage_max_density, (len(self.blockages),)))
        self.regions = CellRegions.empty(n) if regions is None else regions
        #: The power grid (:class:`~floorwidget.kernels.power.PowerShapes`), or None.
        self.power: PowerShapes | None = None

        self._index: dict[str, int] | None = None
        if validate:
            self._drop_single_pin_nets()
            self.validate()
        # initial placement: zeros where none given
        st = np.zeros(n, np.int8) if status is None else status
        init_x = np.zeros(n) if x is None else x
        init_y = np.zeros(n) if y is None else y
        self.initial = Floorplan(self, init_x, init_y, orient, st)
        if validate:
            ini = self.initial
            with np.errstate(invalid="ignore"):
                bad = ~((np.abs(ini.x) <= COORD_LIMIT) & (np.abs(ini.y) <= COORD_LIMIT))
            if bad.any():
                i = int(np.flatnonzero(bad)[0])
                raise DesignError(f"block {self.names[i]!r}: position ({ini.x[i]:g}, "
                                  f"{ini.y[i]:g}) is not finite or beyond ±{COORD_LIMIT:g} µm",
                                  file=self.source, where=f"block {self.names[i]!r}")
            bad = (ini.orient < 0) | (ini.orient >= len(ORIENTATIONS)) \
                | (ini.status < 0) | (ini.status > FIXED)
            if bad.any():
                i = int(np.flatnonzero(bad)[0])
                raise DesignError(f"block {self.names[i]!r}: orientation or status code out of "
                                  "range", file=self.source, where=f"block {self.names[i]!r}")
            bad = ((self.orient_allowed >> ini.orient.astype(np.uint8)) & 1) == 0
            bad &= self.kind == MACRO  # cells and terminals take the orientation of their row
            if bad.any():
                i = int(np.flatnonzero(bad)[0])
                raise DesignError(
                    f"macro {self.names[i]!r}: initial orientation "
                    f"{ORIENTATIONS[int(ini.orient[i])]} is not one of its allowed orientations "
                    f"({', '.join(self.allowed_orientations(self.names[i]))})",
                    file=self.source, where=f"block {self.names[i]!r}")

    def __getstate__(self) -> dict:
        state = self.__dict__.copy()
        state["_index"] = None  # a cache, rebuilt on first use
        return state

    # --- sizes and lookups -------------------------------------------------------------------
    @property
    def num_blocks(self) -> int:
        return len(self.names)

    @property
    def num_nets(self) -> int:
        return len(self.net_start) - 1

    @property
    def num_pins(self) -> int:
        return len(self.pin_block)

    @property
    def index(self) -> dict[str, int]:
        """Name -> block index (built once, shared by every floorplan of this design)."""
        if self._index is None:
            self._index = {nm: i for i, nm in enumerate(self.names)}
        return self._index

    def block(self, name: str) -> int:
        """Index of block ``name``; ``KeyError`` naming it when unknown."""
        try:
            return self.index[name]
        except KeyError:
            raise KeyError(f"no block named {name!r} in design {self.name!r}") from None

    @property
    def macros(self) -> list[str]:
        """Macro names in input order."""
        return [self.names[i] for i in np.flatnonzero(self.kind == MACRO)]

    @property
    def pin_net(self) -> np.ndarray:
        """Net index of every pin."""
        return np.repeat(np.arange(self.num_nets), np.diff(self.net_start))

    @property
    def net_degree(self) -> np.ndarray:
        return np.diff(self.net_start)

    def nets_of(self, blocks) -> np.ndarray:
        """Indices of the nets touching any of ``blocks`` (indices), sorted."""
        mask = np.zeros(self.num_blocks, bool)
        mask[np.asarray(blocks, dtype=np.intp)] = True
        return np.unique(self.pin_net[mask[self.pin_block]])

    def allowed_orientations(self, name: str) -> list[str]:
        bits = int(self.orient_allowed[self.block(name)])
        return [o for i, o in enumerate(ORIENTATIONS) if bits >> i & 1]

    @property
    def full_blockages(self) -> np.ndarray:
        """``(k, 4)`` the blockages that keep everything out (max density 0)."""
        return self.blockages[self.blockage_max_density <= 0.0]

    def partial_blockages(self) -> tuple[np.ndarray, np.ndarray]:
        """``(k, 4)`` rectangles and ``(k,)`` maximum densities of every partial blockage: the
        drawn ones and the power stripes on low layers (at the grid's ``cell_density``)."""
        md = self.blockage_max_density
        part = md > 0.0
        rects, dens = self.blockages[part], md[part]
        g = self.power
        if g is not None and g.cell_density < 1.0:
            low = g.low_stripes()
            if low.any():
                rects = np.concatenate([rects, clip(g.rects[low], self.core)])
                dens = np.concatenate([dens, np.full(int(low.sum()),
                                                     max(g.cell_density, 1e-6))])
        return rects, dens

    def power_shapes(self, fp: Floorplan | None = None) -> PowerShapes | None:
        """The power grid as drawn for ``fp`` (default :attr:`initial`): low stripes and
        followpins cut over the macros, rings around the macros that asked for them; None
        without a grid."""
        g = self.power
        if g is None:
            return None
        r = (fp or self.initial).rects()
        ring = np.array([self.index[m] for m in g.macro_rings if m in self.index], np.intp)
        return g.for_macros(r[self.kind == MACRO], r[ring])

    def same_netlist(self, other: Design) -> bool:
        """Whether ``other`` is this design or one derived from the same one (:meth:`derive`):
        the same blocks and nets, maybe other blockages, halos or cell regions.  Derived
        designs share the name list and the pin arrays (also through a pickle of both)."""
        return isinstance(other, Design) and other.names is self.names \
            and other.pin_block is self.pin_block

    def derive(self, **changes) -> Design:
        """A design sharing this one's netlist and geometry with other *constraints*.

        Parameters
        ----------
        **changes
            Any of ``blockages`` (k, 4), ``blockage_max_density`` (k,), ``halo`` (n, 4),
            ``regions`` (:class:`CellRegions`), ``power``
            (:class:`~floorwidget.kernels.power.PowerShapes` or None).
            Missing ones are shared with this design (arrays are never written in place).

        Returns
        -------
        Design
            Validated (:class:`DesignError` naming the object at fault); its
            :attr:`initial` floorplan is this design's, and :meth:`same_netlist` holds.
        """
        allowed = {"blockages", "blockage_max_density", "halo", "regions", "power"}
        bad = set(changes) - allowed
        if bad:
            raise TypeError(f"derive() takes {', '.join(sorted(allowed))}; got "
                            f"{', '.join(sorted(bad))}")
        new = object.__new__(Design)
        new.__dict__.update(self.__dict__)
        if "blockages" in changes:
            new.blockages = _f64(changes["blockages"], (-1, 4))
            if "blockage_max_density" not in changes:
                changes["blockage_max_density"] = np.zeros(len(new.blockages))
        if "blockage_max_density" in changes:
            new.blockage_max_density = _f64(changes["blockage_max_density"],
                                            (len(new.blockages),))
        if "halo" in changes:
            new.halo = _f64(changes["halo"], (self.num_blocks, 4))
        if "regions" in changes:
            new.regions = changes["regions"]
        if "power" in changes:
            new.power = changes["power"]
        for a in ("blockages", "blockage_max_density", "halo"):
            getattr(new, a).flags.writeable = False
        probs = new._constraint_problems()
        if probs:
            raise DesignError(probs[0][1], file=None, where=probs[0][0])
        ini = self.initial
        new.initial = Floorplan(new, ini.x, ini.y, ini.orient, ini.status, ini.info)
        return new

    def __repr__(self) -> str:
        counts = np.bincount(self.kind, minlength=4)
        return (f"<Design {self.name!r}: {counts[MACRO]} macros, {counts[CLUSTER]} clusters, "
                f"{counts[CELL]} cells, {counts[TERMINAL]} terminals, {self.num_nets} nets, "
                f"die {self.die[2] - self.die[0]:g} x {self.die[3] - self.die[1]:g} µm>")

    # --- validation --------------------------------------------------------------------------
    def _drop_single_pin_nets(self) -> None:
        deg = self.net_degree
        single = deg == 1
        if not single.any():
            return
        warnings.warn(f"design {self.name!r}: dropped {int(single.sum())} single-pin net(s), "
                      f"e.g. {self.net_names[int(np.flatnonzero(single)[0])]!r}", stacklevel=3)
        keep_net = ~single
        keep_pin = np.repeat(keep_net, deg)
        self.pin_block = self.pin_block[keep_pin]
        self.pin_dx = self.pin_dx[keep_pin]
        self.pin_dy = self.pin_dy[keep_pin]
        if self.pin_names is not None:
            self.pin_names = [p for p, k in zip(self.pin_names, keep_pin) if k]
        self.net_start = np.concatenate([[0], np.cumsum(deg[keep_net])]).astype(np.int64)
        self.net_names = [nm for nm, k in zip(self.net_names, keep_net) if k]
        self.net_weight = self.net_weight[keep_net]

    def problems(self) -> list[str]:
        """Every problem with this design, as one-line strings (empty when valid).

        Each names the object at fault (a block, net, row, blockage, the die or the grid).
        """
        with np.errstate(over="ignore", invalid="ignore"):
            return [msg for _, msg in self._problems()]

    def _problems(self) -> list[tuple[str, str]]:
        """``(object, message)`` of every problem, the object as ``DesignError.where`` names it."""
        out: list[tuple[str, str]] = []
        n, m = self.num_blocks, self.num_nets
        lim = COORD_LIMIT

        def add(where: str, msg: str) -> None:
            out.append((where, msg))

        def some(mask, what, names=self.names, limit=3, noun="block"):
            idx = np.flatnonzero(mask)
            if len(idx):
                shown = ", ".join(repr(names[i]) for i in idx[:limit])
                more = f" and {len(idx) - limit} more" if len(idx) > limit else ""
                add(f"{noun} {names[idx[0]]!r}", f"{what}: {shown}{more}")

        def big(a) -> np.ndarray:
            """Rows of ``a`` with a value that is not finite or beyond the coordinate limit."""
            a = np.asarray(a, dtype=np.float64)
            with np.errstate(invalid="ignore"):
                bad = ~(np.abs(a) <= lim)
            return bad.any(axis=1) if a.ndim == 2 else bad

        d = self.die
        if big(d).any() or not (d[2] > d[0] and d[3] > d[1]):
            add("die", f"die {d.tolist()} is not a rectangle of positive size within "
                       f"±{lim:g} µm")
        if len(set(self.names)) != n:
            dup = [k for k, c in Counter(self.names).items() if c > 1]
            add(f"block {dup[0]!r}", f"duplicate block names: {', '.join(map(repr, dup[:3]))}"
                + (f" and {len(dup) - 3} more" if len(dup) > 3 else ""))
        if len(set(self.net_names)) != m:
            dup = [k for k, c in Counter(self.net_names).items() if c > 1]
            add(f"net {dup[0]!r}", f"duplicate net names: {', '.join(map(repr, dup[:3]))}")
        if ((self.kind < 0) | (self.kind > TERMINAL)).any():
            some((self.kind < 0) | (self.kind > TERMINAL), "unknown block kind")
        sized = self.kind != TERMINAL
        bad_size = ~(np.isfinite(self.width) & np.isfinite(self.height))
        bad_size |= sized & ((self.width <= 0) | (self.height <= 0))
        bad_size |= (self.width < 0) | (self.height < 0)
        some(bad_size, "non-positive or non-finite size")
        some(~bad_size & (big(self.width) | big(self.height)), f"size beyond {lim:g} µm")
        some(self.orient_allowed == 0, "no allowed orientation")
        # a macro larger than the die in every allowed orientation
        dw, dh = d[2] - d[0], d[3] - d[1]
        fits_n = (self.width <= dw) & (self.height <= dh)
        fits_r = (self.height <= dw) & (self.width <= dh)
        rot_ok = (self.orient_allowed & 0b11001100) != 0
        some((self.kind == MACRO) & ~(fits_n | (rot_ok & fits_r)), "macro larger than the die")
        # nets
        ns = self.net_start
        if len(ns) == 0 or ns[0] != 0 or ns[-1] != self.num_pins or (np.diff(ns) < 0).any():
            add("nets", "net_start is not a valid CSR index over the pins")
            return out
        if len(self.pin_dx) != self.num_pins or len(self.pin_dy) != self.num_pins:
            add("nets", "pin offset arrays do not match the number of pins")
            return out
        some(self.net_degree == 0, "empty net", names=self.net_names, noun="net")
        some(~np.isfinite(self.net_weight) | (self.net_weight < 0) | (self.net_weight > lim),
             "negative, non-finite or huge net weight", names=self.net_names, noun="net")
        unknown = (self.pin_block < 0) | (self.pin_block >= n)
        if unknown.any():
            some(np.isin(np.arange(m), self.pin_net[unknown]), "pins on unknown blocks",
                 names=self.net_names, noun="net")
        else:
            b = self.pin_block
            tol = 1e-6 + 1e-9 * np.maximum(self.width[b], self.height[b])
            outside = big(self.pin_dx) | big(self.pin_dy)
            with np.errstate(invalid="ignore"):
                outside |= (self.kind[b] != TERMINAL) & (
                    (np.abs(self.pin_dx) > self.width[b] / 2 + tol)
                    | (np.abs(self.pin_dy) > self.height[b] / 2 + tol))
            if outside.any():
                blocks = np.zeros(n, bool)
                blocks[b[outside]] = True
                some(blocks, "pin outside its block")
        # rows and grid
        if len(self.row_x):
            bad = big(self.row_x) | big(self.row_y) | big(self.row_height) \
                | big(self.row_site_width) | (self.row_height <= 0) | (self.row_site_width <= 0) \
                | (self.row_num_sites <= 0) | (self.row_num_sites > MAX_SITES)
            if bad.any():
                r = int(np.flatnonzero(bad)[0])
                add(f"row {r}", f"row {r} (and {int(bad.sum()) - 1} more): origin or height, "
                                f"site width or site count (1..{MAX_SITES}) out of range")
            else:
                c = self.core
                xhi = self.row_x + self.row_site_width * self.row_num_sites
                yhi = self.row_y + self.row_height
                e = 1e-6
                out_die = (self.row_x < d[0] - e) | (self.row_y < d[1] - e) | (xhi > d[2] + e) \
                    | (yhi > d[3] + e)
                if out_die.any():
                    r = int(np.flatnonzero(out_die)[0])
                    add(f"row {r}", f"row {r} (and {int(out_die.sum()) - 1} more) reaches "
                                    f"outside the die (core {c.tolist()}, die {d.tolist()})")
        if big(self.grid_pitch).any() or not (self.grid_pitch > 0).all() \
                or big(self.grid_origin).any():
            add("grid", f"grid pitch {self.grid_pitch.tolist()} must be positive and origin "
                        f"{self.grid_origin.tolist()} finite")
        out.extend(self._constraint_problems())
        return out

    def _constraint_problems(self) -> list[tuple[str, str]]:
        """``(object, message)`` for halos, blockages and their densities, and cell regions
        (what :meth:`derive` changes), each naming the object."""
        out: list[tuple[str, str]] = self.regions.problems(self)
        with np.errstate(invalid="ignore"):
            hl = self.halo
            bad = ~(np.abs(hl) <= COORD_LIMIT).all(axis=1) | (hl < 0).any(axis=1)
            if bad.any():
                i = int(np.flatnonzero(bad)[0])
                out.append((f"block {self.names[i]!r}",
                            f"block {self.names[i]!r}: halo {hl[i].tolist()} must be four "
                            "finite numbers >= 0 (left, bottom, right, top)"))
            cell_halo = (self.kind == CELL) & (hl != 0).any(axis=1)
            if cell_halo.any():
                i = int(np.flatnonzero(cell_halo)[0])
                out.append((f"block {self.names[i]!r}",
                            f"block {self.names[i]!r}: halo {hl[i].tolist()} on a standard "
                            f"cell (a halo keeps cells away from a macro; "
                            f"{int(cell_halo.sum())} cell(s) have one)"))
            bl = self.blockages
            bad = ~(np.abs(bl) <= COORD_LIMIT).all(axis=1) \
                | ~((bl[:, 2] > bl[:, 0]) & (bl[:, 3] > bl[:, 1]))
            d = self.die
            tol = 1e-6 + 1e-9 * np.abs(d).max(initial=0.0)
            outside = ~bad & ((bl[:, 0] < d[0] - tol) | (bl[:, 1] < d[1] - tol)
                              | (bl[:, 2] > d[2] + tol) | (bl[:, 3] > d[3] + tol))
            if bad.any():
                k = int(np.flatnonzero(bad)[0])
                out.append((f"blockage {k}", f"placement blockage {k} {bl[k].tolist()} is not "
                                             "a finite rectangle of positive size"))
            elif outside.any():
                k = int(np.flatnonzero(outside)[0])
                out.append((f"blockage {k}", f"placement blockage {k} {bl[k].tolist()} "
                                             f"reaches outside the die {d.tolist()} "
                                             f"({int(outside.sum())} blockage(s) do)"))
            md = self.blockage_max_density
            bad = ~((md >= 0.0) & (md <= 1.0))
            if bad.any():
                k = int(np.flatnonzero(bad)[0])
                out.append((f"blockage {k}", f"placement blockage {k}: maximum density "
                                             f"{float(md[k])!r} is not in [0, 1]"))
        return out

    def validate(self) -> None:
        """Raise :class:`DesignError` listing every problem at once (message on one line).

        The error's ``file`` is the design's source and ``where`` the object of the first
        problem.
        """
        with np.errstate(over="ignore", invalid="ignore"):  # huge values are reported, not warned
            probs = self._problems()
        if probs:
            head = f"design {self.name!r}"
            msgs = [msg for _, msg in probs]
            raise DesignError(f"{head}: {len(msgs)} problem(s): " + "; ".join(msgs),
                              file=self.source, problems=msgs, where=probs[0][0])


class Floorplan:
    """The mutable state of one placement of a :class:`Design`.

    Attributes
    ----------
    x, y : float64 arrays
        Lower-left corner of each block's oriented footprint, µm.
    orient : int8 array
        Orientation codes (index into :data:`ORIENTATIONS`).
    status : int8 array
        :data:`MOVABLE`, :data:`PINNED` (by the user) or :data:`FIXED` (by the input).
    info : dict
        Free-form facts from whoever produced it (iterations, solve time, ...).

    Copying (:meth:`copy`) duplicates the four arrays and shares the design, so an alternative
    costs ``18`` bytes per block.
    """

    __slots__ = ("design", "x", "y", "orient", "status", "info")

    def __init__(self, design: Design, x, y, orient=None, status=None, info: dict | None = None):
        n = design.num_blocks
        self.design = design
        self.x = np.array(x, dtype=np.float64).reshape(n)
        self.y = np.array(y, dtype=np.float64).reshape(n)
        self.orient = (np.zeros(n, np.int8) if orient is None
                       else np.array(orient, dtype=np.int8).reshape(n))
        self.status = (np.zeros(n, np.int8) if status is None
                       else np.array(status, dtype=np.int8).reshape(n))
        self.info = dict(info or {})

    def copy(self) -> Floorplan:
        return Floorplan(self.design, self.x, self.y, self.orient, self.status, self.info)

    # --- per-name access ---------------------------------------------------------------------
    def position(self, name: str) -> tuple[float, float]:
        i = self.design.block(name)
        return float(self.x[i]), float(self.y[i])

    def orientation(self, name: str) -> str:
        return ORIENTATIONS[int(self.orient[self.design.block(name)])]

    def status_of(self, name: str) -> str:
        return STATUS_NAMES[int(self.status[self.design.block(name)])]

    # --- geometry ----------------------------------------------------------------------------
    def sizes(self) -> tuple[np.ndarray, np.ndarray]:
        """Oriented footprint ``(w, h)`` of every block."""
        return orient_size(self.design.width, self.design.height, self.orient)

    def centres(self) -> tuple[np.ndarray, np.ndarray]:
        w, h = self.sizes()
        return self.x + w / 2, self.y + h / 2

    def rects(self, halo: bool = False) -> np.ndarray:
        """``(n, 4)`` rectangles ``xlo, ylo, xhi, yhi`` (with halos when ``halo``)."""
        w, h = self.sizes()
        r = np.stack([self.x, self.y, self.x + w, self.y + h], axis=1)
        if halo:
            hl = self.design.halo
            r += np.stack([-hl[:, 0], -hl[:, 1], hl[:, 2], hl[:, 3]], axis=1)
        return r

    def pin_positions(self) -> tuple[np.ndarray, np.ndarray]:
        """Absolute position of every pin, orientation and offsets applied."""
        d = self.design
        b = d.pin_block
        cx, cy = self.centres()
        ox, oy = orient_offsets(d.pin_dx, d.pin_dy, self.orient[b])
        return cx[b] + ox, cy[b] + oy

    @property
    def movable(self) -> np.ndarray:
        """Mask of blocks a placer may move."""
        return self.status == MOVABLE

    def identical(self, other: Floorplan) -> bool:
        """Bit-exact equality of positions, orientations and statuses."""
        return (np.array_equal(self.x, other.x) and np.array_equal(self.y, other.y)
                and np.array_equal(self.orient, other.orient)
                and np.array_equal(self.status, other.status))

    def __repr__(self) -> str:
        counts = np.bincount(self.status, minlength=3)
        return (f"<Floorplan of {self.design.name!r}: {counts[MOVABLE]} movable, "
                f"{counts[PINNED]} pinned, {counts[FIXED]} fixed>")


def snap(values, origin: float, pitch: float):
    """Round ``values`` to the nearest grid line ``origin + k * pitch``."""
    return origin + np.round((np.asarray(values, dtype=np.float64) - origin) / pitch) * pitch


def off_grid(values, origin: float, pitch: float, tol: float = 1e-6) -> np.ndarray:
    """Mask of values not on the grid ``origin + k * pitch`` (within ``tol`` µm)."""
    v = np.asarray(values, dtype=np.float64)
    return np.abs(snap(v, origin, pitch) - v) > tol + 1e-12 * np.abs(v)

