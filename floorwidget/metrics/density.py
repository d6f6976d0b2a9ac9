"""Bins and density: the bin grid, exact rectangle area per bin, utilisation and overflow.

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
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..design import CLUSTER, MOVABLE, TERMINAL, Design, Floorplan
from ..kernels.rects import clip, union_rects

__all__ = ["MAX_BINS", "BinGrid", "DensityMap", "bin_grid", "density_map", "density_overflow",
           "peak_density", "rect_area_map", "utilization"]

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
    bl = clip(design.full_blockages, c)
    blockage = _nonneg(rect_area_map(grid, union_rects(bl))) if len(bl) \
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


def utilization(design: Design) -> float:
    """Core utilisation: the footprint area of the macros, soft clusters and standard cells
    (never I/O terminals) over the core area (the rows' bounding box, the die without rows).

    Depends on the design only (areas do not change with placement); NaN for an empty core.

    Examples
    --------
    >>> utilization(design)      # doctest: +SKIP
    0.7
    """
    c = design.core
    core = float((c[2] - c[0]) * (c[3] - c[1]))
    k = design.kind != TERMINAL
    area = float(np.dot(design.width[k], design.height[k]))
    return area / core if core > 0 else float("nan")
