"""The netlist and its geometry, as numpy struct-of-arrays, and the mutable :class:`Floorplan`.

Conventions (see DEVELOPERS.md):

* Units are micrometres as ``float64``.  Database units appear only at the LEF/DEF boundary
  (``Design.dbu`` remembers the input's resolution so that DEF export can write integers).
* A block's position is the **lower-left corner of its footprint after orientation**, which is
  how DEF places components.
* Pin offsets ``pin_dx``/``pin_dy`` are measured from the **block centre in the N orientation**
  (Bookshelf's convention).  :func:`orient_offsets` is the one function that maps them, and the
  footprint, through the eight LEF/DEF orientations.

The module is split by job: the codes, orientations, limits, grid rule and :class:`DesignError`
live in :mod:`floorwidget.codes`, the cell regions in :mod:`floorwidget.cell_regions`, the
validation in :mod:`floorwidget.design_checks`; every public name stays importable from here.
"""

from __future__ import annotations

import warnings
from collections.abc import Sequence

import numpy as np

from .cell_regions import CellRegions
from .codes import (
    ALL_ORIENTS,
    CELL,
    CLUSTER,
    COORD_LIMIT,
    FENCE,
    FIXED,
    GUIDE,
    KIND_NAMES,
    MACRO,
    MAX_SITES,
    MOVABLE,
    ORIENT_CODE,
    ORIENTATIONS,
    PINNED,
    REGION_TYPES,
    STATUS_NAMES,
    TERMINAL,
    DesignError,
    off_grid,
    orient_mask,
    orient_offsets,
    orient_size,
    snap,
)
from .design_checks import constraint_problems, design_problems
from .kernels.power import PowerShapes
from .kernels.rects import clip

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
        """``(object, message)`` of every problem (:func:`.design_checks.design_problems`)."""
        return design_problems(self)

    def _constraint_problems(self) -> list[tuple[str, str]]:
        """``(object, message)`` for halos, blockages and their densities, and cell regions
        (what :meth:`derive` changes; :func:`.design_checks.constraint_problems`)."""
        return constraint_problems(self)

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
