"""Early-floorplanning figures: wirelength, bin density and overflow, RUDY congestion, legality.

Every function here is a pure, vectorised function of ``(design, floorplan)``; nothing imports
ipywidgets or bqplot.  The figures are *estimates* for comparing floorplans early on; sign-off
belongs to the full implementation flow's timing, power and physical checks.

Conventions
-----------
* **HPWL** is the half-perimeter of each net's pin bounding box, with pin offsets and the block
  orientation applied (:meth:`Floorplan.pin_positions`), in µm.
* **Bins** (:class:`BinGrid`) tile the core exactly (``nx * bw == core width``).  The default
  bin side is four standard-cell row heights (a common-practice choice), enlarged so that the
  grid never has more than :data:`MAX_BINS` (128) bins along either side.
* **Density**: *movable area* is the footprint area of movable blocks (macros, clusters and
  cells -- never terminals); *fixed area* that of pinned or fixed blocks (again not terminals);
  both are clipped to the core.  *Free area* of a bin is its area inside the core minus the
  area of the union of full placement blockages in it (a partial blockage only caps the
  placer's cell density; it leaves the free area as it is).
* **Overflow** is ``sum over bins of max(0, movable + fixed - target * free)`` divided by the total
  movable area.  Movable area that lies outside the core is added to the numerator in full
  (outside the core the free area is zero), so pushing blocks out of the core never lowers it.
* **RUDY** (Spindler and Johannes, DATE 2007): each net spreads a demand density
  ``(w + h) / (w * h)`` uniformly over its bounding box, so that the box holds ``w + h`` = its
  HPWL in total.  A box thinner than one bin in x (or y) is widened, about its centre, to one bin
  width (height) while the net's total demand stays ``w + h``.  The map is *wire length per unit
  area*, µm / µm² (= 1/µm), per bin; multiply by a bin's area for µm of wire in it.
* **Legality** uses the placed footprints.  The halo rule (common practice): a halo is a
  keep-out around one macro -- no standard cell and no *other macro's footprint* inside it --
  and halos may overlap each other.  Two macros conflict when the footprint of one overlaps the
  halo box of the other (fixed macros included); facing footprints must stand apart by the
  larger of the two facing halos.

References
----------
P. Spindler and F. M. Johannes, "Fast and accurate routing demand estimation for efficient
routability-driven placement", Design, Automation and Test in Europe (DATE), 2007.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .design import (
    CELL,
    CLUSTER,
    FIXED,
    MACRO,
    MOVABLE,
    TERMINAL,
    Design,
    Floorplan,
    off_grid,
    orient_offsets,
    orient_size,
)

__all__ = [
    "MAX_BINS",
    "REPORT_KEYS",
    "BinGrid",
    "DensityMap",
    "bin_grid",
    "Channels",
    "LogicRegions",
    "cell_legality",
    "channel_gaps",
    "default_channel",
    "congestion_stats",
    "density_map",
    "density_overflow",
    "evaluate",
    "facing_wall",
    "hpwl",
    "legality",
    "logic_regions",
    "macros_facing_wall",
    "narrow_channels",
    "nearest_wall",
    "net_hpwl",
    "nets_hpwl",
    "peak_density",
    "periphery_macros",
    "pin_side",
    "row_of",
    "pin_positions",
    "rudy_map",
    "wall_bars",
]

#: Upper bound on the number of bins along either side of the default grid.  128 keeps a map
#: near 100 kB, so the report after every drop in the notebook stays at a few milliseconds
#: (large full-grid temporaries cost more in fresh memory pages than in arithmetic).
MAX_BINS = 128
#: Default bin side in standard-cell row heights (common practice: a few rows).
ROWS_PER_BIN = 4
#: Bins along the longer core side when the design has no rows.
BINS_WITHOUT_ROWS = 128
#: Up to this many rectangles, :func:`rect_area_map` sums outer products instead.
DIRECT_RECTS = 48
#: Geometric tolerance, µm.
TOL = 1e-6

REPORT_KEYS = (
    "hpwl", "hpwl_weighted", "density_overflow", "peak_density", "congestion_peak",
    "congestion_p99", "macro_overlaps", "macro_overlap_area", "out_of_die", "off_grid", "legal",
    "num_blocks", "num_nets", "target_density", "cell_overlaps", "cells_off_row",
    "cells_off_site", "narrow_channels", "macros_facing_wall", "logic_regions",
    "largest_logic_region", "pinned_illegal",
)


# ---------------------------------------------------------------------------------------------
# wirelength


def _segment_bbox(px: np.ndarray, py: np.ndarray, starts: np.ndarray, deg: np.ndarray):
    """Per-segment min/max of ``px``/``py`` over CSR segments; empty segments give zeros."""
    m = len(deg)
    out = np.zeros((4, m))
    nz = deg > 0
    if not nz.any():
        return out
    s = starts[nz]
    out[0, nz] = np.minimum.reduceat(px, s)
    out[1, nz] = np.minimum.reduceat(py, s)
    out[2, nz] = np.maximum.reduceat(px, s)
    out[3, nz] = np.maximum.reduceat(py, s)
    return out


def pin_positions(design: Design, fp: Floorplan) -> tuple[np.ndarray, np.ndarray]:
    """Absolute pin positions, as :meth:`Floorplan.pin_positions`, faster when most blocks are N.

    Only the pins of blocks in another orientation go through :func:`orient_offsets`.
    """
    b = design.pin_block
    w, h = fp.sizes()
    cx, cy = (fp.x + w / 2)[b], (fp.y + h / 2)[b]
    po = fp.orient[b]
    turned = np.flatnonzero(po != 0)
    if len(turned) == len(b):
        ox, oy = orient_offsets(design.pin_dx, design.pin_dy, po)
        return cx + ox, cy + oy
    px, py = cx + design.pin_dx, cy + design.pin_dy
    if len(turned):
        ox, oy = orient_offsets(design.pin_dx[turned], design.pin_dy[turned], po[turned])
        px[turned] = cx[turned] + ox
        py[turned] = cy[turned] + oy
    return px, py


def net_boxes(design: Design, fp: Floorplan) -> np.ndarray:
    """Pin bounding box of every net as a ``(m, 4)`` array ``xlo, ylo, xhi, yhi`` (µm)."""
    px, py = pin_positions(design, fp)
    st = design.net_start
    box = _segment_bbox(px, py, st[:-1], np.diff(st))
    return box.T.copy()


def net_hpwl(design: Design, fp: Floorplan) -> np.ndarray:
    """Half-perimeter wirelength of every net, µm.

    Parameters
    ----------
    design : Design
    fp : Floorplan
        Positions and orientations; pin offsets are mapped through each block's orientation.

    Returns
    -------
    ndarray of shape (num_nets,)

    Examples
    --------
    >>> import floorwidget as fw
    >>> d = fw.load("demo_data/heron_dsp.json")         # doctest: +SKIP
    >>> net_hpwl(d, d.initial).shape == (d.num_nets,)  # doctest: +SKIP
    True
    """
    b = net_boxes(design, fp)
    return (b[:, 2] - b[:, 0]) + (b[:, 3] - b[:, 1])


def hpwl(design: Design, fp: Floorplan, weighted: bool = False) -> float:
    """Total HPWL, µm; with ``weighted`` each net counts ``net_weight`` times."""
    per = net_hpwl(design, fp)
    if weighted:
        return float(np.dot(per, design.net_weight))
    return float(per.sum())


def nets_hpwl(design: Design, fp: Floorplan, nets) -> np.ndarray:
    """HPWL of the nets ``nets`` (indices) only, in the order given.

    Touches only the pins of those nets, O(their pin count): the widget uses it to update a
    dragged macro's nets (``design.nets_of([i])``) while the drag is under way.
    """
    nets = np.asarray(nets, dtype=np.intp).reshape(-1)
    st = design.net_start
    s, e = st[nets], st[nets + 1]
    deg = e - s
    local = np.cumsum(deg) - deg
    total = int(deg.sum())
    idx = np.repeat(s - local, deg) + np.arange(total)
    b = design.pin_block[idx]
    o = fp.orient[b]
    w, h = orient_size(design.width[b], design.height[b], o)
    ox, oy = orient_offsets(design.pin_dx[idx], design.pin_dy[idx], o)
    px = fp.x[b] + w / 2 + ox
    py = fp.y[b] + h / 2 + oy
    box = _segment_bbox(px, py, local, deg)
    return (box[2] - box[0]) + (box[3] - box[1])


# ---------------------------------------------------------------------------------------------
# bins


@dataclass(frozen=True)
class BinGrid:
    """A regular grid of ``nx`` by ``ny`` bins of ``bw`` by ``bh`` µm from ``(xlo, ylo)``.

    Maps over the grid are ``(nx, ny)`` arrays indexed ``[column, row]``.
    """

    xlo: float
    ylo: float
    nx: int
    ny: int
    bw: float
    bh: float

    @property
    def xhi(self) -> float:
        return self.xlo + self.nx * self.bw

    @property
    def yhi(self) -> float:
        return self.ylo + self.ny * self.bh

    @property
    def shape(self) -> tuple[int, int]:
        return (self.nx, self.ny)

    @property
    def bin_area(self) -> float:
        return self.bw * self.bh

    @property
    def extent(self) -> tuple[float, float, float, float]:
        """``(xlo, ylo, xhi, yhi)`` of the whole grid."""
        return (self.xlo, self.ylo, self.xhi, self.yhi)

    def x_edges(self) -> np.ndarray:
        return self.xlo + self.bw * np.arange(self.nx + 1)

    def y_edges(self) -> np.ndarray:
        return self.ylo + self.bh * np.arange(self.ny + 1)

    def x_centres(self) -> np.ndarray:
        return self.xlo + self.bw * (np.arange(self.nx) + 0.5)

    def y_centres(self) -> np.ndarray:
        return self.ylo + self.bh * (np.arange(self.ny) + 0.5)

    def locate(self, x, y) -> tuple[np.ndarray, np.ndarray]:
        """Bin column and row of points (clamped to the grid)."""
        i = np.clip(np.floor((np.asarray(x, float) - self.xlo) / self.bw), 0, self.nx - 1)
        j = np.clip(np.floor((np.asarray(y, float) - self.ylo) / self.bh), 0, self.ny - 1)
        return i.astype(np.intp), j.astype(np.intp)


def bin_grid(design: Design, bin_size: float | tuple[float, float] | None = None) -> BinGrid:
    """Bins tiling the core.

    Parameters
    ----------
    design : Design
    bin_size : float or (float, float), optional
        Wanted bin side(s), µm.  The grid rounds it so that whole bins tile the core.  Default:
        ``ROWS_PER_BIN`` (4) row heights, or the longer core side / 128 without rows; at least
        twice the median side of the soft clusters, if the design has any (a soft cluster
        stands for many standard cells whose area spreads over a region; a bin smaller than
        the cluster would count it as a solid block of density 1 and report overflow no
        placement could remove); either way grown so that no side has more than
        :data:`MAX_BINS` (128) bins.  An explicit ``bin_size`` is honoured up to 4096 bins a
        side.

    Returns
    -------
    BinGrid
    """
    c = design.core
    cw, ch = float(c[2] - c[0]), float(c[3] - c[1])
    if bin_size is None:
        if len(design.row_height):
            side = ROWS_PER_BIN * float(np.median(design.row_height))
        else:
            side = max(cw, ch) / BINS_WITHOUT_ROWS
        soft = design.kind == CLUSTER
        if soft.any():
            side = max(side, 2.0 * float(np.median(np.sqrt(design.width[soft]
                                                            * design.height[soft]))))
        side = max(side, max(cw, ch) / MAX_BINS)
        want = (side, side)
        cap = MAX_BINS
    else:
        want = tuple(np.broadcast_to(np.asarray(bin_size, float), (2,)))
        if not all(np.isfinite(want)) or min(want) <= 0:
            raise ValueError(f"bin_size must be positive, got {bin_size!r}")
        cap = 4096
    nx = int(min(cap, max(1, round(cw / want[0]))))
    ny = int(min(cap, max(1, round(ch / want[1]))))
    return BinGrid(float(c[0]), float(c[1]), nx, ny, cw / nx, ch / ny)


def _split(v: np.ndarray, lo: float, b: float, n: int):
    """Bin index of ``v`` and the length from ``v`` to that bin's upper edge."""
    i = np.clip(np.floor((v - lo) / b).astype(np.intp), 0, n - 1)
    return i, np.clip(lo + (i + 1) * b - v, 0.0, b)


def rect_area_map(grid: BinGrid, rects: np.ndarray, weights=None) -> np.ndarray:
    """Area of each rectangle inside each bin (times ``weights``), summed per bin.

    Exact, and O(rectangles + bins) for many rectangles: every rectangle is written as a signed
    sum of four quadrants ``[x0, inf) x [y0, inf)``; a quadrant's area in bin ``(i, j)`` is a
    product of a column term (0 before its column, a fraction in it, ``bw`` after it) and a row
    term.  The "after" parts
    become running sums, so each corner costs a constant number of scattered additions and the
    map costs three cumulative sums.  Up to :data:`DIRECT_RECTS` rectangles the map is the sum of
    the outer products of each rectangle's column and row overlaps (cheaper there, also exact).
    Rectangles are clipped to the grid.

    Parameters
    ----------
    grid : BinGrid
    rects : (k, 4) array of ``xlo, ylo, xhi, yhi``
    weights : (k,) array, optional

    Returns
    -------
    (nx, ny) float64 array
    """
    rects = np.asarray(rects, dtype=np.float64).reshape(-1, 4)
    nx, ny = grid.nx, grid.ny
    x0 = np.clip(rects[:, 0], grid.xlo, grid.xhi)
    x1 = np.clip(rects[:, 2], grid.xlo, grid.xhi)
    y0 = np.clip(rects[:, 1], grid.ylo, grid.yhi)
    y1 = np.clip(rects[:, 3], grid.ylo, grid.yhi)
    keep = (x1 > x0) & (y1 > y0)
    wt = np.ones(len(rects)) if weights is None else np.broadcast_to(
        np.asarray(weights, np.float64), (len(rects),))
    keep &= wt != 0
    if not keep.any():
        return np.zeros((nx, ny))
    x0, x1, y0, y1, wt = x0[keep], x1[keep], y0[keep], y1[keep], wt[keep]
    if len(x0) <= DIRECT_RECTS:
        # few rectangles: sum of outer products of their column and row overlaps
        ex, ey = grid.x_edges(), grid.y_edges()
        ox = np.clip(np.minimum(x1[:, None], ex[None, 1:]) - np.maximum(x0[:, None], ex[None, :-1]),
                     0.0, None)
        oy = np.clip(np.minimum(y1[:, None], ey[None, 1:]) - np.maximum(y0[:, None], ey[None, :-1]),
                     0.0, None)
        if len(x0) == 1:
            return np.outer(ox[0] * wt[0], oy[0])
        return (ox * wt[:, None]).T @ oy
    cx = np.concatenate([x0, x1, x0, x1])
    cy = np.concatenate([y0, y0, y1, y1])
    sg = np.concatenate([wt, -wt, -wt, wt])
    i, fx = _split(cx, grid.xlo, grid.bw, nx)
    j, fy = _split(cy, grid.ylo, grid.bh, ny)
    size = nx * ny

    def scatter(ii, jj, val):
        # corners one past the last bin only feed running sums beyond the grid: drop them
        ok = (ii < nx) & (jj < ny)
        return np.bincount(np.where(ok, ii * ny + jj, 0), weights=np.where(ok, val, 0.0),
                           minlength=size).reshape(nx, ny)

    # out = D + C0(SX) + C1(SY) + C0(C1(SXY)), with Ck a running sum along axis k; in place,
    # since fresh full-grid temporaries cost more than the arithmetic here
    out = scatter(i + 1, j + 1, sg * grid.bin_area)
    np.cumsum(out, axis=1, out=out)
    out += scatter(i + 1, j, sg * grid.bw * fy)
    np.cumsum(out, axis=0, out=out)
    sy = scatter(i, j + 1, sg * fx * grid.bh)
    np.cumsum(sy, axis=1, out=sy)
    out += sy
    out += scatter(i, j, sg * fx * fy)
    return out


def _union_rects(rects: np.ndarray, max_edges: int = 2000) -> np.ndarray:
    """Disjoint rectangles covering the union of ``rects`` (coordinate compression).

    Beyond ``max_edges`` distinct edges per axis the input is returned as it is (overlaps
    among blockages then count twice; the free area is still clipped at zero).
    """
    if len(rects) <= 1:
        return rects
    ux = np.unique(rects[:, [0, 2]])
    uy = np.unique(rects[:, [1, 3]])
    if len(ux) > max_edges or len(uy) > max_edges:
        return rects
    a0, a1 = np.searchsorted(ux, rects[:, 0]), np.searchsorted(ux, rects[:, 2])
    b0, b1 = np.searchsorted(uy, rects[:, 1]), np.searchsorted(uy, rects[:, 3])
    cover = np.zeros((len(ux), len(uy)), np.int64)
    np.add.at(cover, (a0, b0), 1)
    np.add.at(cover, (a1, b0), -1)
    np.add.at(cover, (a0, b1), -1)
    np.add.at(cover, (a1, b1), 1)
    cover = np.cumsum(np.cumsum(cover, axis=0), axis=1)[:-1, :-1]
    ci, cj = np.nonzero(cover > 0)
    return np.stack([ux[ci], uy[cj], ux[ci + 1], uy[cj + 1]], axis=1)


# ---------------------------------------------------------------------------------------------
# density


def _nonneg(a: np.ndarray) -> np.ndarray:
    """Clip the round-off of running sums at zero, in place."""
    np.maximum(a, 0.0, out=a)
    return a


@dataclass
class DensityMap:
    """Per-bin areas (µm², ``(nx, ny)`` arrays) from :func:`density_map`.

    Attributes
    ----------
    grid : BinGrid
    movable, fixed, blockage, free, core : ndarray
        Movable block area, pinned/fixed block area, full placement-blockage area (union), free
        area (bin area inside the core minus blockage) and bin area inside the core, per bin.
    movable_outside : float
        Movable area outside the core (it is in no bin).
    total_movable : float
        Footprint area of all movable, non-terminal blocks.
    """

    grid: BinGrid
    movable: np.ndarray
    fixed: np.ndarray
    blockage: np.ndarray
    free: np.ndarray
    core: np.ndarray
    movable_outside: float
    total_movable: float

    @property
    def utilisation(self) -> np.ndarray:
        """``(movable + fixed) / (bin area inside the core)`` per bin (1.0 = exactly full).

        Bins outside the core read 0.
        """
        used = self.movable + self.fixed
        np.divide(used, self.core, out=used, where=self.core > 1e-12 * self.grid.bin_area)
        used[self.core <= 1e-12 * self.grid.bin_area] = 0.0
        return used

    def overflow(self, target_density: float = 0.8) -> float:
        """Overflow ratio at ``target_density`` (see :func:`density_overflow`)."""
        if self.total_movable <= 0:
            return 0.0
        excess = np.multiply(self.free, -float(target_density))
        excess += self.movable
        excess += self.fixed
        np.maximum(excess, 0.0, out=excess)
        return float((excess.sum() + self.movable_outside) / self.total_movable)


def density_map(design: Design, fp: Floorplan, grid: BinGrid | None = None) -> DensityMap:
    """Movable, fixed, blockage and free area per bin, by exact rectangle-bin overlap.

    Parameters
    ----------
    design : Design
    fp : Floorplan
    grid : BinGrid, optional
        Default :func:`bin_grid`.

    Returns
    -------
    DensityMap
    """
    grid = bin_grid(design) if grid is None else grid
    rects = fp.rects()
    sized = design.kind != TERMINAL
    mov = sized & (fp.status == MOVABLE)
    fix = sized & (fp.status != MOVABLE)
    movable = _nonneg(rect_area_map(grid, rects[mov]))
    fixed = _nonneg(rect_area_map(grid, rects[fix]))
    c = design.core
    core_area = rect_area_map(grid, c[None, :])
    bl = design.full_blockages
    if len(bl):
        bl = bl.copy()
        bl[:, [0, 2]] = np.clip(bl[:, [0, 2]], c[0], c[2])
        bl[:, [1, 3]] = np.clip(bl[:, [1, 3]], c[1], c[3])
        bl = bl[(bl[:, 2] > bl[:, 0]) & (bl[:, 3] > bl[:, 1])]
    blockage = _nonneg(rect_area_map(grid, _union_rects(bl))) if len(bl) \
        else np.zeros(grid.shape)
    free = np.subtract(core_area, blockage)
    _nonneg(free)
    w, h = design.width[mov], design.height[mov]
    total = float(np.dot(w, h))
    outside = max(0.0, total - float(movable.sum()))
    if outside <= 1e-9 * max(total, 1.0):
        outside = 0.0
    return DensityMap(grid, movable, fixed, blockage, free, core_area, outside, total)


def density_overflow(design: Design, fp: Floorplan, target_density: float = 0.8,
                     grid: BinGrid | None = None) -> float:
    """Density overflow ratio.

    ``sum_bins max(0, movable + fixed - target_density * free) / total movable area``, with
    movable area outside the core counted in full (see the module notes); 0 when nothing is
    movable.

    Parameters
    ----------
    design : Design
    fp : Floorplan
    target_density : float
        Wanted fill of each bin's free area, e.g. 0.8.
    grid : BinGrid, optional

    Returns
    -------
    float
        0 means every bin is within target.

    Examples
    --------
    >>> density_overflow(d, fp, target_density=1.0)   # doctest: +SKIP
    0.0
    """
    return density_map(design, fp, grid).overflow(target_density)


def peak_density(design: Design, fp: Floorplan, grid: BinGrid | None = None) -> float:
    """Largest ``(movable + fixed) / (bin area inside the core)`` over the bins."""
    dm = density_map(design, fp, grid)
    return float(dm.utilisation.max()) if dm.movable.size else 0.0


# ---------------------------------------------------------------------------------------------
# congestion


def rudy_map(design: Design, fp: Floorplan, grid: BinGrid | None = None) -> np.ndarray:
    """RUDY routing-demand map, wire length per unit area (µm / µm²) per bin.

    Each net's pin bounding box ``w x h`` receives the uniform density ``(w + h) / (w h)``
    (Spindler and Johannes, DATE 2007), so it holds its HPWL ``w + h`` in total.  A box thinner
    than a bin along an axis is widened about its centre to one bin along that axis, keeping the
    total at ``w + h``; a net whose pins all coincide has no demand.  Boxes are clipped to the
    core.  Nets are not weighted.

    Parameters
    ----------
    design : Design
    fp : Floorplan
    grid : BinGrid, optional

    Returns
    -------
    (nx, ny) float64 array

    References
    ----------
    P. Spindler and F. M. Johannes, "Fast and accurate routing demand estimation for efficient
    routability-driven placement", DATE 2007.
    """
    grid = bin_grid(design) if grid is None else grid
    return _rudy(grid, net_boxes(design, fp))


def _rudy(grid: BinGrid, box: np.ndarray) -> np.ndarray:
    w = box[:, 2] - box[:, 0]
    h = box[:, 3] - box[:, 1]
    demand = w + h
    ew = np.maximum(w, grid.bw)
    eh = np.maximum(h, grid.bh)
    cx = (box[:, 0] + box[:, 2]) / 2
    cy = (box[:, 1] + box[:, 3]) / 2
    rects = np.stack([cx - ew / 2, cy - eh / 2, cx + ew / 2, cy + eh / 2], axis=1)
    dens = demand / (ew * eh)
    m = rect_area_map(grid, rects, dens)
    m = _nonneg(m)
    m /= grid.bin_area
    return m


def congestion_stats(rudy: np.ndarray) -> tuple[float, float]:
    """``(peak, 99th percentile)`` of a RUDY map."""
    if rudy.size == 0:
        return 0.0, 0.0
    v = rudy.ravel()
    q = 0.99 * (v.size - 1)  # the linear-interpolation rank np.percentile uses
    lo = int(np.floor(q))
    hi = min(lo + 1, v.size - 1)
    part = np.partition(v, [lo, hi])
    p99 = part[lo] + (part[hi] - part[lo]) * (q - lo)
    return float(v.max()), float(p99)


# ---------------------------------------------------------------------------------------------
# legality


def _overlap_pairs(r: np.ndarray, tol: float = TOL, foot: np.ndarray | None = None
                   ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Pairs ``(a, b)`` (a < b) of rectangles overlapping by more than ``tol`` in x and y.

    With ``foot`` (footprints inside the boxes ``r``, one per box) the halo rule applies
    instead: a pair conflicts when the footprint of one overlaps the box of the other by more
    than ``tol`` in x and y, and its area is that of the union of the two footprint-box
    intersections, ``|f_a & r_b| + |f_b & r_a| - |f_a & f_b|``.

    Sort-based broad phase: with rectangles sorted by left edge, the candidates of each one are
    the following rectangles whose left edge is left of its right edge (``searchsorted``); they
    are generated and tested as flat arrays.  Work is O(n log n + candidates); candidates are
    O(n^2) only when all rectangles share one x span, which for a few thousand macros is still
    a few million vectorised tests.
    """
    n = len(r)
    if n < 2:
        z = np.zeros(0, np.intp)
        return z, z, np.zeros(0)
    order = np.argsort(r[:, 0], kind="stable")
    rs = r[order]
    end = np.searchsorted(rs[:, 0], rs[:, 2] - tol, side="left")
    cnt = np.maximum(end - np.arange(n) - 1, 0)
    total = int(cnt.sum())
    a = np.repeat(np.arange(n), cnt)
    first = np.cumsum(cnt) - cnt
    b = a + 1 + (np.arange(total) - np.repeat(first, cnt))
    ox = np.minimum(rs[a, 2], rs[b, 2]) - np.maximum(rs[a, 0], rs[b, 0])
    oy = np.minimum(rs[a, 3], rs[b, 3]) - np.maximum(rs[a, 1], rs[b, 1])
    hit = (ox > tol) & (oy > tol)
    ia, ib = order[a[hit]], order[b[hit]]
    area = ox[hit] * oy[hit]
    if foot is not None:  # candidates: the boxes overlap; keep footprint-against-box hits
        def inter(p, q):
            wx = np.minimum(p[:, 2], q[:, 2]) - np.maximum(p[:, 0], q[:, 0])
            wy = np.minimum(p[:, 3], q[:, 3]) - np.maximum(p[:, 1], q[:, 1])
            return wx, wy, np.maximum(wx, 0) * np.maximum(wy, 0)
        ax, ay, a_in_b = inter(foot[ia], r[ib])
        bx, by, b_in_a = inter(foot[ib], r[ia])
        keep = ((ax > tol) & (ay > tol)) | ((bx > tol) & (by > tol))
        area = (a_in_b + b_in_a - inter(foot[ia], foot[ib])[2])[keep]
        ia, ib = ia[keep], ib[keep]
    lo, hi = np.minimum(ia, ib), np.maximum(ia, ib)
    srt = np.lexsort((hi, lo))
    return lo[srt], hi[srt], area[srt]


def legality(design: Design, fp: Floorplan) -> dict:
    """Legality checks of a floorplan.

    Parameters
    ----------
    design : Design
    fp : Floorplan

    Returns
    -------
    dict
        ``overlap_pairs`` ((k, 2) int array of macro pairs in conflict under the halo rule:
        a footprint overlapping the other's halo box; fixed macros included),
        ``overlap_areas`` (k,), ``macro_overlaps`` (k), ``macro_overlap_area`` (µm², per pair
        the area of the union of its footprint-against-halo-box intersections),
        ``out_of_die`` (indices of blocks whose footprint leaves the die), ``out_of_core``
        (macros whose footprint leaves the core),
        ``on_blockage`` (macros whose footprint overlaps a placement blockage),
        ``off_grid`` (movable or pinned macros whose lower-left corner is off the snap grid;
        fixed macros come from the input and are exempt) and ``legal`` (none of these).
    """
    mac = np.flatnonzero(design.kind == MACRO)
    rects = fp.rects()
    halo_r = fp.rects(halo=True)[mac]
    a, b, area = _overlap_pairs(halo_r, foot=rects[mac])
    pairs = np.stack([mac[a], mac[b]], axis=1) if len(a) else np.zeros((0, 2), np.intp)
    d, c = design.die, design.core
    out_die = ((rects[:, 0] < d[0] - TOL) | (rects[:, 1] < d[1] - TOL)
               | (rects[:, 2] > d[2] + TOL) | (rects[:, 3] > d[3] + TOL))
    mr = rects[mac]
    out_core = ((mr[:, 0] < c[0] - TOL) | (mr[:, 1] < c[1] - TOL)
                | (mr[:, 2] > c[2] + TOL) | (mr[:, 3] > c[3] + TOL))
    bl = design.full_blockages
    if len(bl) and len(mac):
        ox = np.minimum(mr[:, None, 2], bl[None, :, 2]) - np.maximum(mr[:, None, 0], bl[None, :, 0])
        oy = np.minimum(mr[:, None, 3], bl[None, :, 3]) - np.maximum(mr[:, None, 1], bl[None, :, 1])
        on_bl = ((ox > TOL) & (oy > TOL)).any(axis=1)
    else:
        on_bl = np.zeros(len(mac), bool)
    g0, gp = design.grid_origin, design.grid_pitch
    offg = (off_grid(fp.x[mac], g0[0], gp[0]) | off_grid(fp.y[mac], g0[1], gp[1]))
    offg &= fp.status[mac] != FIXED
    res = {
        "overlap_pairs": pairs,
        "overlap_areas": area,
        "macro_overlaps": int(len(a)),
        "macro_overlap_area": float(area.sum()),
        "out_of_die": np.flatnonzero(out_die),
        "out_of_core": mac[out_core],
        "on_blockage": mac[on_bl],
        "off_grid": mac[offg],
    }
    res["legal"] = bool(len(a) == 0 and not out_die.any() and not out_core.any()
                        and not on_bl.any() and not offg.any())
    return res


# ---------------------------------------------------------------------------------------------
# the report


#: Default channel between facing macros, in (median) row heights (common practice: a few
#: rows, room for routing and a power strap); see :func:`default_channel`.
DEFAULT_CHANNEL_ROWS = 4


def pinned_illegal(design: Design, fp: Floorplan, leg: dict | None = None) -> list[str]:
    """Names of the pinned or fixed macros that break legality on their own — outside the
    core, on a placement blockage, off the grid (pinned only), or in conflict with another
    non-movable macro — which no placer run can repair (it never moves them)."""
    leg = legality(design, fp) if leg is None else leg
    still = fp.status != MOVABLE
    bad = np.zeros(design.num_blocks, bool)
    for key in ("out_of_core", "on_blockage", "off_grid"):
        bad[leg[key]] = True
    pairs = leg["overlap_pairs"]
    if len(pairs):
        both = still[pairs[:, 0]] & still[pairs[:, 1]]
        bad[pairs[both].ravel()] = True
    bad &= still & (design.kind == MACRO)
    return [design.names[i] for i in np.flatnonzero(bad)]


def default_channel(design: Design) -> float:
    """The default channel width (µm): :data:`DEFAULT_CHANNEL_ROWS` median row heights, or
    1 % of the shorter core side for a design without rows.  Two facing macros are either
    abutted (halos only) or at least this far apart."""
    if len(design.row_height):
        return DEFAULT_CHANNEL_ROWS * float(np.median(design.row_height))
    c = design.core
    return 0.01 * float(min(c[2] - c[0], c[3] - c[1]))


def cell_legality(design: Design, fp: Floorplan) -> dict:
    """Row legality of the standard cells (soft clusters are not cells and are not checked).

    Parameters
    ----------
    design : Design
    fp : Floorplan

    Returns
    -------
    dict
        ``cells_off_row`` (movable or pinned cells whose bottom is not on the bottom of a row
        whose span holds the cell), ``cells_off_site`` (cells on a row whose left edge is not on
        one of its sites), ``cell_overlaps`` (pairs of cells overlapping by a positive area,
        plus pairs of a cell and a macro's halo box or a placement blockage it overlaps; fixed
        cells included), and ``cells_legal`` (all three zero).  Cells fixed by the input are
        exempt from the row and site checks, like fixed macros from the grid check.
    """
    cells = np.flatnonzero(design.kind == CELL)
    res = {"cell_overlaps": 0, "cells_off_row": 0, "cells_off_site": 0, "cells_legal": True}
    if not len(cells):
        return res
    r = fp.rects()
    chk = cells[fp.status[cells] != FIXED]
    if len(design.row_y):
        row, off_site = row_of(design, fp.x[chk], fp.y[chk], r[chk, 2] - r[chk, 0])
        off_row = row < 0
    else:
        off_row, off_site = np.ones(len(chk), bool), np.zeros(len(chk), bool)
    # obstacles: macro halo boxes and blockages
    mac = np.flatnonzero(design.kind == MACRO)
    obs = fp.rects(halo=True)[mac]
    if len(design.full_blockages):
        obs = np.concatenate([obs, design.full_blockages])
    rc = r[cells]
    bad_pairs = _banded_overlaps(rc) + _cross_overlaps(rc, obs)
    res.update(cell_overlaps=bad_pairs, cells_off_row=int(off_row.sum()),
               cells_off_site=int(off_site.sum()))
    res["cells_legal"] = not (bad_pairs or off_row.any() or off_site.any())
    return res


def _banded_overlaps(r: np.ndarray, tol: float = TOL) -> int:
    """Number of overlapping pairs among rectangles no taller than a few rows (cells).

    The plane is cut into horizontal bands as tall as the tallest rectangle, so each
    rectangle lies in at most two bands and two overlapping ones share a band; the x-sweep of
    :func:`_overlap_pairs` then runs per band (rectangles keyed by band, then left edge) and
    never pairs cells of far-apart rows.  A pair met in two bands is counted once.
    """
    n = len(r)
    if n < 2:
        return 0
    hb = float(np.max(r[:, 3] - r[:, 1])) + tol
    b0 = np.floor(r[:, 1] / hb).astype(np.int64)
    b1 = np.floor((r[:, 3] - tol) / hb).astype(np.int64)
    two = b1 > b0
    idx = np.concatenate([np.arange(n), np.flatnonzero(two)])
    band = np.concatenate([b0, b1[two]])
    span = float(np.max(r[:, 2]) - np.min(r[:, 0])) + 1.0
    # one key per (band, x): shifting every band by the x span keeps bands apart in one sweep
    shift = (band - band.min()).astype(np.float64) * 2.0 * span
    rr = r[idx].copy()
    rr[:, 0] += shift
    rr[:, 2] += shift
    a, b, _ = _overlap_pairs(rr, tol)
    ia, ib = idx[a], idx[b]
    keep = ia != ib
    pairs = np.unique(np.stack([np.minimum(ia, ib), np.maximum(ia, ib)], axis=1)[keep], axis=0)
    return int(len(pairs))


def _cross_overlaps(cells: np.ndarray, obs: np.ndarray, tol: float = TOL) -> int:
    """Number of (cell, obstacle) pairs overlapping by a positive area: for each obstacle the
    cells whose left edge lies within its reach are found by ``searchsorted`` on the sorted
    left edges and tested as one flat array."""
    if not len(cells) or not len(obs):
        return 0
    order = np.argsort(cells[:, 0], kind="stable")
    cs = cells[order]
    wmax = float(np.max(cs[:, 2] - cs[:, 0]))
    lo = np.searchsorted(cs[:, 0], obs[:, 0] - wmax, side="left")
    hi = np.searchsorted(cs[:, 0], obs[:, 2] - tol, side="left")
    cnt = np.maximum(hi - lo, 0)
    o = np.repeat(np.arange(len(obs)), cnt)
    first = np.cumsum(cnt) - cnt
    c = lo[o] + (np.arange(int(cnt.sum())) - first[o])
    ox = np.minimum(cs[c, 2], obs[o, 2]) - np.maximum(cs[c, 0], obs[o, 0])
    oy = np.minimum(cs[c, 3], obs[o, 3]) - np.maximum(cs[c, 1], obs[o, 1])
    return int(np.sum((ox > tol) & (oy > tol)))


def row_of(design: Design, x, y, w) -> tuple[np.ndarray, np.ndarray]:
    """The row holding each cell (lower-left ``x, y``, width ``w``), -1 when none does, and
    whether a cell on a row is off its sites; vectorised with one sorted key per row (row
    level, then x)."""
    order = np.lexsort((design.row_x, design.row_y))
    ry, rx = design.row_y[order], design.row_x[order]
    sw, ns = design.row_site_width[order], design.row_num_sites[order]
    levels = np.unique(ry)
    big = 4.0 * (float(np.max(np.abs(np.concatenate([rx + sw * ns, np.abs(x) + w])))) + 1.0)
    lv_row = np.searchsorted(levels, ry)
    li = np.clip(np.searchsorted(levels, y - TOL), 0, len(levels) - 1)
    on_level = np.abs(levels[li] - y) <= TOL
    key_r = lv_row * big + rx
    k = np.searchsorted(key_r, li * big + x + TOL, side="right") - 1
    k = np.clip(k, 0, len(ry) - 1)
    inside = (lv_row[k] == li) & (x >= rx[k] - TOL) & (x + w <= rx[k] + sw[k] * ns[k] + TOL)
    on_row = on_level & inside
    f = (x - rx[k]) / sw[k]
    off_site = on_row & (np.abs(f - np.round(f)) * sw[k] > TOL)
    return np.where(on_row, order[k], -1), off_site


def evaluate(design: Design, fp: Floorplan | None = None, target_density: float | None = None,
             bin_size: float | None = None, channel: float | None = None) -> dict:
    """Every report figure of a floorplan, as plain JSON-serialisable Python values.

    These are early-floorplanning estimates for comparing alternatives; sign-off belongs to the
    implementation flow's timing, power and physical checks.

    Parameters
    ----------
    design : Design
    fp : Floorplan, optional
        Default ``design.initial``.
    target_density : float, optional
        For the overflow figure; default the value the placer used (``fp.info``), else 0.8.
    bin_size : float, optional
        Bin side, µm (default from :func:`bin_grid`).
    channel : float, optional
        Smallest open channel between facing macros, µm, for ``narrow_channels``; default the
        one the placer used (``fp.info["channel"]``), else :func:`default_channel`.

    Returns
    -------
    dict
        Keys :data:`REPORT_KEYS`: ``hpwl`` and ``hpwl_weighted`` (µm), ``density_overflow``,
        ``peak_density``, ``congestion_peak`` and ``congestion_p99`` (RUDY, µm/µm²),
        ``macro_overlaps`` (pairs in conflict under the halo rule), ``macro_overlap_area`` (µm²),
        ``out_of_die`` (blocks), ``off_grid`` (macros), ``legal``, ``num_blocks``, ``num_nets``;
        the floorplan's shape: ``narrow_channels`` (:func:`channel_gaps`),
        ``macros_facing_wall`` (:func:`facing_wall`), ``logic_regions`` and
        ``largest_logic_region`` (:func:`logic_regions`).

    Examples
    --------
    >>> import floorwidget as fw
    >>> d = fw.load("demo_data/heron_dsp.json")   # doctest: +SKIP
    >>> sorted(fw.evaluate(d))[:3]                 # doctest: +SKIP
    ['congestion_p99', 'congestion_peak', 'density_overflow']
    """
    fp = design.initial if fp is None else fp
    if target_density is None:
        target_density = float(fp.info.get("target_density", 0.8))
    grid = bin_grid(design, bin_size)
    box = net_boxes(design, fp)
    per = (box[:, 2] - box[:, 0]) + (box[:, 3] - box[:, 1])
    dm = density_map(design, fp, grid)
    peak, p99 = congestion_stats(_rudy(grid, box))
    leg = legality(design, fp)
    cl = cell_legality(design, fp)
    lr = logic_regions(design, fp)
    return {
        "hpwl": float(per.sum()),
        "hpwl_weighted": float(np.dot(per, design.net_weight)),
        "density_overflow": dm.overflow(target_density),
        "peak_density": float(dm.utilisation.max()),
        "congestion_peak": peak,
        "congestion_p99": p99,
        "macro_overlaps": int(leg["macro_overlaps"]),
        "macro_overlap_area": float(leg["macro_overlap_area"]),
        "out_of_die": int(len(leg["out_of_die"])),
        "off_grid": int(len(leg["off_grid"])),
        "legal": bool(leg["legal"]) and cl["cells_legal"],
        "num_blocks": int(design.num_blocks),
        "num_nets": int(design.num_nets),
        "target_density": float(target_density),
        "cell_overlaps": cl["cell_overlaps"],
        "cells_off_row": cl["cells_off_row"],
        "cells_off_site": cl["cells_off_site"],
        "narrow_channels": narrow_channels(
            design, fp, fp.info.get("channel") if channel is None else channel),
        "macros_facing_wall": macros_facing_wall(design, fp),
        "logic_regions": lr.count,
        "largest_logic_region": lr.largest,
        "pinned_illegal": ", ".join(pinned_illegal(design, fp, leg)),
    }


# ---------------------------------------------------------------------------------------------
# floorplan shape: channels between macros, pins facing a wall, logic regions
#
# Early-floorplanning rules of thumb (common practice, no single source): hard macros sit
# against the core boundary or against each other, pin side toward the logic, with the channel
# between two facing macros either closed (halos touching) or wide enough to route and power,
# and the standard-cell area left in one piece.

#: Without rows, the length unit of the shape figures is this share of the shorter core side.
UNIT_WITHOUT_ROWS = 0.01
#: Logic-region raster: pixel side in row heights, and the most pixels the raster may have
#: (the pixel grows to stay within it).
PIXELS_PER_ROW = 4
MAX_PIXELS = 2**21
#: Logic regions are found on the exact grid of the obstacles' edges up to this many cells.
EXACT_MAX_CELLS = 2**20
#: A logic region counts when its area exceeds this many square row heights (2 x 2 rows).
MIN_REGION_ROWS2 = 4.0


def _row_unit(design: Design) -> float:
    """Median row height, or :data:`UNIT_WITHOUT_ROWS` of the shorter core side without rows."""
    if len(design.row_height):
        return float(np.median(design.row_height))
    c = design.core
    return UNIT_WITHOUT_ROWS * float(min(c[2] - c[0], c[3] - c[1]))


@dataclass(frozen=True)
class Channels:
    """Narrow channels between facing macros (:func:`channel_gaps`).

    Attributes
    ----------
    pairs : (k, 2) int array
        Block indices ``a < b`` of the two macros on either side.
    gaps : (k,) float array
        Footprint-to-footprint distance across the channel, µm.
    strips : (k, 4) float array
        The channel itself, ``xlo, ylo, xhi, yhi``: the gap between the two footprints along
        the axis they face on, times their common span on the other axis.
    vertical : (k,) bool array
        True when the strip runs up and down (the macros face each other left and right).
    channel : float
        The channel width the gaps were compared with, µm.
    """

    pairs: np.ndarray
    gaps: np.ndarray
    strips: np.ndarray
    vertical: np.ndarray
    channel: float

    def __len__(self) -> int:
        return len(self.gaps)


def channel_gaps(design: Design, fp: Floorplan, channel: float | None = None) -> Channels:
    """Pairs of facing macros whose channel is open but narrower than ``channel``.

    Two macros *face* each other when the projections of their footprints on one axis overlap
    by a positive length and their footprints are apart along the other axis; the *gap* is the
    footprint-to-footprint distance along that axis, and the *strip* is the rectangle between
    them over their common span.  A third macro whose footprint overlaps the strip (a positive
    area) stands between the two: they do not face each other, and that macro's own gaps are
    counted instead.  (So three macros abutted in a row give no channel between the outer two.)

    A facing pair is *narrow* when ``h_a + h_b < gap < channel``, where ``h_a`` and ``h_b`` are
    the two halos on the facing sides: a gap up to ``h_a + h_b`` means the halos touch or
    overlap, the macros are abutted under the halo rule and no cells or routes are meant to
    pass; without halos that is ``0 < gap < channel``.  All macros count, fixed ones too.

    Parameters
    ----------
    design : Design
    fp : Floorplan
    channel : float, optional
        Smallest open channel, µm; default :func:`default_channel`.

    Returns
    -------
    Channels
        Sorted by pair.
    """
    ch = default_channel(design) if channel is None else float(channel)
    if not (np.isfinite(ch) and ch >= 0):
        raise ValueError(f"channel must be a non-negative number of µm, got {channel!r}")
    mac = np.flatnonzero(design.kind == MACRO)
    empty = Channels(np.zeros((0, 2), np.intp), np.zeros(0), np.zeros((0, 4)),
                     np.zeros(0, bool), ch)
    if len(mac) < 2 or ch <= TOL:
        return empty
    f = fp.rects()[mac]
    # candidates: footprints grown by half a channel overlap (broad phase of the legality check)
    a, b, _ = _overlap_pairs(f + np.array([-ch, -ch, ch, ch]) / 2)
    fa, fb = f[a], f[b]
    ox = np.minimum(fa[:, 2], fb[:, 2]) - np.maximum(fa[:, 0], fb[:, 0])
    oy = np.minimum(fa[:, 3], fb[:, 3]) - np.maximum(fa[:, 1], fb[:, 1])
    vertical = (oy > TOL) & (-ox > TOL)      # side by side: the strip runs up and down
    horizontal = (ox > TOL) & (-oy > TOL)    # one above the other
    gap = np.where(vertical, -ox, -oy)
    keep = (vertical | horizontal) & (gap < ch - TOL)
    a, b, gap, vertical = a[keep], b[keep], gap[keep], vertical[keep]
    fa, fb = f[a], f[b]
    strips = np.where(
        vertical[:, None],
        np.stack([np.minimum(fa[:, 2], fb[:, 2]), np.maximum(fa[:, 1], fb[:, 1]),
                  np.maximum(fa[:, 0], fb[:, 0]), np.minimum(fa[:, 3], fb[:, 3])], axis=1),
        np.stack([np.maximum(fa[:, 0], fb[:, 0]), np.minimum(fa[:, 3], fb[:, 3]),
                  np.minimum(fa[:, 2], fb[:, 2]), np.maximum(fa[:, 1], fb[:, 1])], axis=1))
    # facing halos: left/right (0, 2) or bottom/top (1, 3) of the lower-left and upper-right one
    hl = design.halo[mac]
    first = np.where(vertical, fa[:, 0] < fb[:, 0], fa[:, 1] < fb[:, 1])
    lo, hi = np.where(first, a, b), np.where(first, b, a)
    facing = np.where(vertical, hl[lo, 2] + hl[hi, 0], hl[lo, 3] + hl[hi, 1])
    keep = gap > facing + TOL
    a, b, gap, vertical, strips = a[keep], b[keep], gap[keep], vertical[keep], strips[keep]
    if len(a):  # a third footprint inside the strip: the pair does not face each other
        blocked = np.zeros(len(a), bool)
        s_i, m_i, _ = _overlap_pairs(np.concatenate([strips, f]))
        cross = (s_i < len(a)) & (m_i >= len(a))
        s_i, m_i = s_i[cross], m_i[cross] - len(a)
        third = (m_i != a[s_i]) & (m_i != b[s_i])
        blocked[s_i[third]] = True
        a, b, gap, vertical, strips = (a[~blocked], b[~blocked], gap[~blocked],
                                       vertical[~blocked], strips[~blocked])
    pa, pb = mac[a], mac[b]
    pairs = np.stack([np.minimum(pa, pb), np.maximum(pa, pb)], axis=1)
    order = np.lexsort((pairs[:, 1], pairs[:, 0]))
    return Channels(pairs[order], gap[order], strips[order], vertical[order], ch)


def narrow_channels(design: Design, fp: Floorplan, channel: float | None = None) -> int:
    """Number of pairs of facing macros with a channel narrower than ``channel`` (see
    :func:`channel_gaps` for the rule)."""
    return len(channel_gaps(design, fp, channel))


_SIDES = ("left", "right", "bottom", "top")


def pin_side(design: Design, fp: Floorplan) -> np.ndarray:
    """The side of its footprint each macro's pins lie on, by their centroid.

    The centroid of a macro's pin offsets (oriented by :func:`orient_offsets`), divided by the
    half-width and half-height of the oriented footprint, gives ``(u, v)``; the side is the one
    the centroid points to most: left (``-u``), right (``u``), bottom (``-v``) or top (``v``),
    when that score is positive and strictly larger than the other three.

    Parameters
    ----------
    design : Design
    fp : Floorplan

    Returns
    -------
    (num_macros,) int array
        Per macro in ``design.macros`` order: 0 left, 1 right, 2 bottom, 3 top, -1 no side (no
        pins, or a centroid at the centre or on a diagonal).
    """
    mac = np.flatnonzero(design.kind == MACRO)
    n = design.num_blocks
    b = design.pin_block
    onmac = design.kind[b] == MACRO
    b = b[onmac]
    ox, oy = orient_offsets(design.pin_dx[onmac], design.pin_dy[onmac], fp.orient[b])
    cnt = np.bincount(b, minlength=n)[mac]
    sx = np.bincount(b, weights=ox, minlength=n)[mac]
    sy = np.bincount(b, weights=oy, minlength=n)[mac]
    w, h = fp.sizes()
    with np.errstate(invalid="ignore", divide="ignore"):
        u = sx / np.maximum(cnt, 1) / (w[mac] / 2)
        v = sy / np.maximum(cnt, 1) / (h[mac] / 2)
    score = np.nan_to_num(np.stack([-u, u, -v, v], axis=1))
    best = np.argmax(score, axis=1)
    top = score[np.arange(len(mac)), best]
    second = np.sort(score, axis=1)[:, -2]
    ok = (cnt > 0) & (top > 1e-9) & (top > second + 1e-9)
    return np.where(ok, best, -1)


def nearest_wall(design: Design, fp: Floorplan) -> np.ndarray:
    """The core edge nearest each macro's footprint: 0 left, 1 right, 2 bottom, 3 top.

    Distances are from the footprint's side to the core edge on that side; a tie goes to the
    first in that order.  Per macro in ``design.macros`` order.
    """
    mac = np.flatnonzero(design.kind == MACRO)
    r = fp.rects()[mac]
    c = design.core
    dist = np.stack([r[:, 0] - c[0], c[2] - r[:, 2], r[:, 1] - c[1], c[3] - r[:, 3]], axis=1)
    return np.argmin(dist, axis=1)


def facing_wall(design: Design, fp: Floorplan) -> np.ndarray:
    """Block indices of the macros whose pins face the nearest core edge.

    A macro faces the wall when its pin side (:func:`pin_side`) is the side toward the core
    edge nearest its footprint (:func:`nearest_wall`): its pins then point away from the logic
    they connect to.  Macros without pins never count; fixed macros count like the others.

    Parameters
    ----------
    design : Design
    fp : Floorplan

    Returns
    -------
    int array
    """
    mac, _, hit = _wall_hits(design, fp)
    return mac[hit]


def _wall_hits(design: Design, fp: Floorplan):
    """Macro indices, their pin sides, and the mask of those whose pins face the wall."""
    mac = np.flatnonzero(design.kind == MACRO)
    side = pin_side(design, fp)
    return mac, side, (side == nearest_wall(design, fp)) & (side >= 0)


def wall_bars(design: Design, fp: Floorplan, depth: float = 0.12) -> tuple[np.ndarray,
                                                                            np.ndarray]:
    """Marks for the macros of :func:`facing_wall`: a thin rectangle along each one's pin side,
    inside the footprint, ``depth`` times its shorter side deep.

    Returns
    -------
    blocks : int array
    bars : (k, 4) array of ``xlo, ylo, xhi, yhi``
    """
    mac, side, hit = _wall_hits(design, fp)
    r = fp.rects()[mac[hit]]
    side = side[hit]
    t = depth * np.minimum(r[:, 2] - r[:, 0], r[:, 3] - r[:, 1])
    bars = r.copy()
    bars[side == 0, 2] = r[side == 0, 0] + t[side == 0]   # left: keep a strip at xlo
    bars[side == 1, 0] = r[side == 1, 2] - t[side == 1]   # right
    bars[side == 2, 3] = r[side == 2, 1] + t[side == 2]   # bottom
    bars[side == 3, 1] = r[side == 3, 3] - t[side == 3]   # top
    return mac[hit], bars


def macros_facing_wall(design: Design, fp: Floorplan) -> int:
    """Number of macros whose pins face the nearest core edge (:func:`facing_wall`)."""
    return len(facing_wall(design, fp))


def periphery_macros(design: Design, fp: Floorplan) -> np.ndarray:
    """Block indices of the macros on the periphery: against the core boundary, or abutted to
    a macro that is.

    A macro is *against the boundary* when the gap between its footprint and a core edge is at
    most its halo on that side (nothing fits between); two macros are *abutted* when their
    footprints' projections on one axis overlap by a positive length and their halo boxes
    touch or overlap (the abutment of :func:`channel_gaps`).  One step only: a macro abutted to
    an abutted macro is not on the periphery unless it is against the boundary itself.

    Parameters
    ----------
    design : Design
    fp : Floorplan

    Returns
    -------
    int array
    """
    mac = np.flatnonzero(design.kind == MACRO)
    f = fp.rects()[mac]
    hl = design.halo[mac]
    c = design.core
    gap = np.stack([f[:, 0] - c[0], f[:, 1] - c[1], c[2] - f[:, 2], c[3] - f[:, 3]], axis=1)
    wall = (gap <= hl + TOL).any(axis=1)
    a, b, _ = _overlap_pairs(fp.rects(halo=True)[mac] + np.array([-TOL, -TOL, TOL, TOL]), 0.0)
    ox = np.minimum(f[a, 2], f[b, 2]) - np.maximum(f[a, 0], f[b, 0])
    oy = np.minimum(f[a, 3], f[b, 3]) - np.maximum(f[a, 1], f[b, 1])
    face = (ox > TOL) | (oy > TOL)
    a, b = a[face], b[face]
    on = wall.copy()
    on[a[wall[b]]] = True
    on[b[wall[a]]] = True
    return mac[on]


@dataclass(frozen=True)
class LogicRegions:
    """The free core area cut into connected pieces (:func:`logic_regions`).

    Attributes
    ----------
    labels : (nx, ny) int array
        Per raster cell, 0 where macros, halos or blockages are, else the piece it belongs to
        (1, 2, ...; indexed ``[column, row]``).
    x_edges, y_edges : (nx + 1,) and (ny + 1,) float arrays
        The raster's cell edges, µm (uneven on the exact grid).
    areas : (k,) float array
        Area of every piece, µm², largest first (``labels`` numbers follow the same order).
    count : int
        Pieces larger than :data:`MIN_REGION_ROWS2` square row heights.
    largest : float
        The largest piece's share of the free area (0 when nothing is free).
    exact : bool
        Whether the raster was the exact grid of the obstacles' edges (else even pixels).
    """

    labels: np.ndarray
    x_edges: np.ndarray
    y_edges: np.ndarray
    areas: np.ndarray
    count: int
    largest: float
    exact: bool


def logic_regions(design: Design, fp: Floorplan) -> LogicRegions:
    """Connected pieces of the core free of macros (with their halos) and of blockages.

    The core is cut into a raster whose cells are each wholly covered or wholly free: the grid
    of every obstacle edge (halo boxes and placement blockages, clipped to the core), which is
    exact, while it has at most :data:`EXACT_MAX_CELLS` cells; else even pixels a quarter row
    height wide (:data:`PIXELS_PER_ROW`), grown to keep within :data:`MAX_PIXELS`, a pixel being
    free when its centre lies in no obstacle (areas then within about half a pixel times the
    obstacles' perimeter).  Free cells are joined across shared edges (4-connectivity; pieces
    meeting at a corner only stay apart) by ``scipy.ndimage.label``.  A piece counts as a logic
    region when its area exceeds :data:`MIN_REGION_ROWS2` (2 x 2) square row heights;
    ``largest`` is the largest piece's share of all free area.

    Parameters
    ----------
    design : Design
    fp : Floorplan

    Returns
    -------
    LogicRegions
    """
    from scipy import ndimage

    c = design.core
    unit = _row_unit(design)
    obs = fp.rects(halo=True)[design.kind == MACRO]
    if len(design.full_blockages):
        obs = np.concatenate([obs, design.full_blockages])
    obs = np.stack([np.clip(obs[:, 0], c[0], c[2]), np.clip(obs[:, 1], c[1], c[3]),
                    np.clip(obs[:, 2], c[0], c[2]), np.clip(obs[:, 3], c[1], c[3])], axis=1)
    obs = obs[(obs[:, 2] > obs[:, 0]) & (obs[:, 3] > obs[:, 1])]
    xe = np.unique(np.concatenate([c[[0, 2]], obs[:, 0], obs[:, 2]]))
    ye = np.unique(np.concatenate([c[[1, 3]], obs[:, 1], obs[:, 3]]))
    exact = (len(xe) - 1) * (len(ye) - 1) <= EXACT_MAX_CELLS
    if exact:  # every edge is a grid line: cells are wholly in or out
        i0, i1 = np.searchsorted(xe, obs[:, 0]), np.searchsorted(xe, obs[:, 2])
        j0, j1 = np.searchsorted(ye, obs[:, 1]), np.searchsorted(ye, obs[:, 3])
    else:
        cw, chh = float(c[2] - c[0]), float(c[3] - c[1])
        side = max(unit / PIXELS_PER_ROW, np.sqrt(cw * chh / MAX_PIXELS))
        nx, ny = max(1, int(round(cw / side))), max(1, int(round(chh / side)))
        px, py = cw / nx, chh / ny
        xe, ye = c[0] + px * np.arange(nx + 1), c[1] + py * np.arange(ny + 1)
        # pixels whose centre xlo + (i + 1/2) px lies strictly inside: i in [i0, i1)
        i0 = np.clip(np.floor((obs[:, 0] - c[0]) / px + 0.5), 0, nx).astype(np.intp)
        i1 = np.clip(np.ceil((obs[:, 2] - c[0]) / px - 0.5), 0, nx).astype(np.intp)
        j0 = np.clip(np.floor((obs[:, 1] - c[1]) / py + 0.5), 0, ny).astype(np.intp)
        j1 = np.clip(np.ceil((obs[:, 3] - c[1]) / py - 0.5), 0, ny).astype(np.intp)
    nx, ny = len(xe) - 1, len(ye) - 1
    ok = (i1 > i0) & (j1 > j0)
    i0, i1, j0, j1 = i0[ok], i1[ok], j0[ok], j1[ok]
    cover = np.zeros((nx + 1, ny + 1), np.int32)
    np.add.at(cover, (i0, j0), 1)
    np.add.at(cover, (i1, j0), -1)
    np.add.at(cover, (i0, j1), -1)
    np.add.at(cover, (i1, j1), 1)
    np.cumsum(cover, axis=0, out=cover)
    np.cumsum(cover, axis=1, out=cover)
    labels, k = ndimage.label(cover[:nx, :ny] == 0)
    cell = np.outer(np.diff(xe), np.diff(ye))
    per = np.bincount(labels.ravel(), weights=cell.ravel(), minlength=k + 1)[1:]
    order = np.argsort(-per, kind="stable")
    relabel = np.zeros(k + 1, labels.dtype)
    relabel[order + 1] = np.arange(1, k + 1)
    labels = relabel[labels]
    areas = per[order]
    free = float(areas.sum())
    return LogicRegions(labels, xe, ye, areas,
                        int(np.sum(areas > MIN_REGION_ROWS2 * unit * unit)),
                        float(areas[0] / free) if free > 0 else 0.0, bool(exact))
