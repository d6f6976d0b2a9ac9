"""The initial floorplan of a netlist: die, core, rows, routing tracks and I/O pins.

A gate-level netlist has no geometry.  Its first floorplan comes from a few choices of the
engineer: the core *utilisation* (standard-cell and macro area over core area), the core's
*aspect* (height over width), the *margin* between core and die (room for the I/O pins and
the power ring), or simply the die.  From these and the LEF library this module makes

* the core: a whole number of sites wide and of rows high (the LEF ``SITE`` of the standard
  cells), its lower-left corner at the margin;
* the rows: one per site height, orientations alternating N, FS, N, ... from the bottom, so
  that neighbouring rows share their power rail (common practice);
* the routing tracks (DEF ``TRACKS``): for every LEF routing layer with a direction and a
  pitch, tracks across the die in its preferred direction, the first half a pitch in from the
  die edge (common practice);
* the I/O pins, spread evenly around the die edges in port order (:func:`place_pins_evenly`,
  the one place where pins are first placed; an optimising assignment can replace it);
* macros and cells movable, not yet placed (:func:`floorwidget.place` does that): macros at
  the core centre, cells spread over the rows in netlist order, so that the report can measure
  the unplaced design.

The figures are early-floorplanning estimates; sign-off belongs to the full implementation
flow's timing, power and physical checks.
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..design import CELL, MACRO, MOVABLE, TERMINAL, Design, DesignError, orient_size
from ..formats.lefdef import LefLibrary, read_lef
from ..formats.verilog import Netlist, read_verilog

__all__ = [
    "DEFAULT_MARGIN_ROWS",
    "DEFAULT_UTILIZATION",
    "Track",
    "core_size",
    "floorplan_netlist",
    "load_netlist",
    "make_rows",
    "make_tracks",
    "pick_site",
    "place_pins_evenly",
]

#: Utilisation used when none is given: room for buffering, routing and the power grid
#: (a common starting point, not a rule).
DEFAULT_UTILIZATION = 0.7
#: Core margin, in row heights, when none is given.
DEFAULT_MARGIN_ROWS = 20


@dataclass(frozen=True)
class Track:
    """A DEF ``TRACKS`` statement, µm: ``axis`` "X" (vertical tracks at x = start + k·step)
    or "Y" (horizontal ones), ``count`` tracks, on ``layer``."""

    axis: str
    start: float
    count: int
    step: float
    layer: str


def pick_site(lib: LefLibrary, height: np.ndarray | None = None) -> tuple[str, float, float]:
    """The LEF site of the standard cells: the site whose height is the most common cell
    height (``height``: the standard cells' heights), else the first site.

    Raises
    ------
    DesignError
        When the library has no ``SITE``.
    """
    if not lib.sites:
        raise DesignError("the LEF library has no SITE: rows cannot be made",
                          file=", ".join(lib.files) or None, where="SITE")
    names = list(lib.sites)
    if height is not None and len(height):
        common = Counter(np.round(np.asarray(height), 6).tolist()).most_common(1)[0][0]
        for nm in names:
            if abs(lib.sites[nm][1] - common) < 1e-6:
                return nm, *lib.sites[nm]
    return names[0], *lib.sites[names[0]]


def core_size(area: float, utilization: float, aspect: float, site_w: float,
              row_h: float) -> tuple[int, int]:
    """Sites per row and rows for a core of ``area / utilization`` µm² at ``aspect``
    (height / width), each rounded to the nearest whole number (at least one).

    The core is ``W = sqrt(A / aspect)`` wide and ``H = aspect · W`` high before rounding, so
    that ``W · H = A`` with ``A = area / utilization``.
    """
    a = area / utilization
    w = math.sqrt(a / aspect)
    return max(1, round(w / site_w)), max(1, round(aspect * w / row_h))


def make_rows(core_x: float, core_y: float, sites: int, rows: int, site_w: float,
              row_h: float, site_name: str) -> dict:
    """Rows for :class:`Design`: ``rows`` rows of ``sites`` sites from ``(core_x, core_y)``,
    orientations N, FS, N, ... from the bottom."""
    k = np.arange(rows)
    return {"x": np.full(rows, core_x), "y": core_y + k * row_h, "height": np.full(rows, row_h),
            "site_width": np.full(rows, site_w), "num_sites": np.full(rows, sites, np.int64),
            "orient": np.where(k % 2 == 0, 0, 5).astype(np.int8),  # N = 0, FS = 5
            "site_name": site_name}


def make_tracks(die: Sequence[float], layers: Sequence[tuple[str, str, float]],
                dbu: int) -> list[Track]:
    """Tracks of every routing layer ``(name, "H" | "V", pitch)`` across ``die``: vertical
    layers get x tracks, horizontal ones y tracks, half a pitch in from the lower die edge
    (rounded to the database unit) and as many as fit."""
    out = []
    for name, d, pitch in layers:
        lo, hi = (die[0], die[2]) if d == "V" else (die[1], die[3])
        start = lo + round(pitch / 2 * dbu) / dbu
        count = int(math.floor((hi - start) / pitch + 1e-9)) + 1
        if count > 0:
            out.append(Track("X" if d == "V" else "Y", start, count, pitch, name))
    return out


def place_pins_evenly(die: Sequence[float], width: np.ndarray, height: np.ndarray,
                      dbu: int = 1000) -> tuple[np.ndarray, np.ndarray]:
    """Lower-left corners of ``n`` pin shapes spread evenly around the die edges, in order:
    along the bottom edge left to right, up the right edge, along the top right to left and
    down the left edge (counter-clockwise), each shape inside the die touching its edge.

    Pin ``k`` sits at arc length ``(k + 1/2) · P / n`` of the perimeter ``P``, rounded to the
    database unit.

    Raises
    ------
    DesignError
        When the pins' shapes do not fit side by side on the perimeter.
    """
    x1, y1, x2, y2 = map(float, die)
    w, h = x2 - x1, y2 - y1
    n = len(width)
    if n == 0:
        return np.zeros(0), np.zeros(0)
    per = 2 * (w + h)
    side = float(np.max(np.maximum(width, height)))
    if n * side > per:
        raise DesignError(f"{n} I/O pins of {side:g} µm do not fit on the die perimeter "
                          f"({per:g} µm)", where="die")
    s = (np.arange(n) + 0.5) * per / n
    x = np.empty(n)
    y = np.empty(n)
    e0 = s < w                          # bottom
    e1 = (s >= w) & (s < w + h)         # right
    e2 = (s >= w + h) & (s < 2 * w + h)  # top
    e3 = s >= 2 * w + h                 # left
    x[e0], y[e0] = x1 + s[e0] - width[e0] / 2, y1
    x[e1], y[e1] = x2 - width[e1], y1 + (s[e1] - w) - height[e1] / 2
    x[e2], y[e2] = x2 - (s[e2] - w - h) - width[e2] / 2, y2 - height[e2]
    x[e3], y[e3] = x1, y2 - (s[e3] - 2 * w - h) - height[e3] / 2
    x = np.clip(x, x1, x2 - width)
    y = np.clip(y, y1, y2 - height)
    return np.round(x * dbu) / dbu, np.round(y * dbu) / dbu


def _fill_rows(width: np.ndarray, cx: float, cy: float, sites: int, rows: int, site_w: float,
               row_h: float) -> tuple[np.ndarray, np.ndarray]:
    """Unplaced cells spread over the rows in netlist order, evenly spaced and on sites: a
    start that the placer replaces, but one the report can measure (cells stacked on one
    point would make every pair overlap)."""
    core_w = sites * site_w
    start = np.cumsum(width) - width
    total = float(start[-1] + width[-1]) if len(width) else 0.0
    s = start * max(1.0, rows * core_w / total) if total > 0 else start
    r = np.minimum((s // core_w).astype(np.int64), rows - 1)
    x = np.minimum(np.floor((s - r * core_w) / site_w) * site_w, core_w - width)
    return cx + np.maximum(x, 0.0), cy + r * row_h


def _check_fraction(v: float, what: str, src: str | None) -> float:
    v = float(v)
    if not (math.isfinite(v) and 0 < v <= 1):
        raise DesignError(f"{what} must be in (0, 1], got {v:g}", where=what, file=src)
    return v


def floorplan_netlist(nl: Netlist, lib: LefLibrary, *, utilization: float | None = None,
                      aspect: float | None = None, margin: float | None = None,
                      die: Sequence[float] | None = None) -> Design:
    """A :class:`Design` with die, core, rows, tracks and I/O pins for a flat netlist.

    Parameters
    ----------
    nl : Netlist
        From :func:`floorwidget.formats.verilog.read_verilog`.
    lib : LefLibrary
        Its LEF library (sites, routing layers, database units).
    utilization : float, optional
        Standard-cell and macro area over core area, in (0, 1]; default
        :data:`DEFAULT_UTILIZATION` (0.7).  Not with ``die``.
    aspect : float, optional
        Core height over width, > 0 (default 1).  Not with ``die``.
    margin : float, optional
        Space between core and die on every side, µm, >= 0 (default
        :data:`DEFAULT_MARGIN_ROWS` row heights).
    die : (x1, y1, x2, y2), optional
        The die, µm; the core is the die less the margin, cut down to whole sites and rows.

    Returns
    -------
    Design
        Macros and cells movable, not yet placed; I/O terminals at their first places
        (:func:`place_pins_evenly`); ``design.tracks`` the :class:`Track` list;
        ``design.routing_layers`` and ``design.lef_files`` from the library.

    Raises
    ------
    DesignError
        For a utilisation out of (0, 1], a bad aspect, margin or die, no LEF site, a core
        too small for the cells and macros, or a macro that fits the core in none of its
        allowed orientations.
    """
    src = nl.source or None
    site_name, site_w, row_h = pick_site(lib, nl.height[nl.kind == CELL])
    dbu = int(lib.dbu or 1000)
    placeable = nl.kind != TERMINAL
    area = float(np.sum(nl.width[placeable] * nl.height[placeable]))
    if margin is None:
        margin = DEFAULT_MARGIN_ROWS * row_h
    margin = float(margin)
    if not (math.isfinite(margin) and margin >= 0):
        raise DesignError(f"margin must be a number of µm >= 0, got {margin:g}",
                          where="margin", file=src)
    margin = round(margin * dbu) / dbu
    if die is not None:
        if utilization is not None or aspect is not None:
            raise DesignError("give either a die or a utilisation and aspect, not both",
                              where="die", file=src)
        die = np.asarray(die, np.float64).reshape(-1)
        if len(die) != 4 or not np.isfinite(die).all() or die[2] <= die[0] or die[3] <= die[1]:
            raise DesignError(f"die must be x1 y1 x2 y2 with x1 < x2 and y1 < y2, got "
                              f"{' '.join(f'{v:g}' for v in die)}", where="die", file=src)
        die = np.round(die * dbu) / dbu
        cw, ch = die[2] - die[0] - 2 * margin, die[3] - die[1] - 2 * margin
        sites = int(math.floor(cw / site_w + 1e-9)) if cw > 0 else 0
        rows = int(math.floor(ch / row_h + 1e-9)) if ch > 0 else 0
        if sites < 1 or rows < 1:
            raise DesignError(f"the die leaves no room for a row inside a margin of {margin:g} "
                              "µm", where="die", file=src)
        cx, cy = die[0] + margin, die[1] + margin
    else:
        utilization = _check_fraction(DEFAULT_UTILIZATION if utilization is None
                                      else utilization, "utilization", src)
        aspect = 1.0 if aspect is None else float(aspect)
        if not (math.isfinite(aspect) and 1e-3 <= aspect <= 1e3):
            raise DesignError(f"aspect (core height / width) must be in [0.001, 1000], got "
                              f"{aspect:g}", where="aspect", file=src)
        if area <= 0:
            raise DesignError("the netlist has no cell or macro area", file=src, where="netlist")
        sites, rows = core_size(area, utilization, aspect, site_w, row_h)
        cx = cy = margin
        die = np.array([0.0, 0.0, 2 * margin + sites * site_w, 2 * margin + rows * row_h])
    core_w, core_h = sites * site_w, rows * row_h
    if area > core_w * core_h * (1 + 1e-9):
        raise DesignError(f"cells and macros ({area:.6g} µm²) exceed the core "
                          f"({core_w:.6g} x {core_h:.6g} µm): utilisation "
                          f"{area / (core_w * core_h):.3g} > 1", where="die", file=src)
    # every macro must fit the core in one of its allowed orientations
    mac = np.flatnonzero(nl.kind == MACRO)
    if len(mac):
        fits = np.zeros(len(mac), bool)
        for o in range(8):
            ok = ((nl.orient_allowed[mac] >> o) & 1).astype(bool)
            w, h = orient_size(nl.width[mac], nl.height[mac], np.full(len(mac), o))
            fits |= ok & (w <= core_w + 1e-9) & (h <= core_h + 1e-9)
        if not fits.all():
            i = int(mac[np.flatnonzero(~fits)[0]])
            raise DesignError(f"macro {nl.names[i]!r} ({nl.width[i]:g} x {nl.height[i]:g} µm) "
                              f"does not fit the core ({core_w:.6g} x {core_h:.6g} µm); lower "
                              "the utilisation, change the aspect or give a larger die",
                              where=f"block {nl.names[i]!r}", file=src)
    rows_d = make_rows(cx, cy, sites, rows, site_w, row_h, site_name)
    # I/O terminals: a square of the finest routing pitch, spread around the die
    term = nl.kind == TERMINAL
    width, height = nl.width.copy(), nl.height.copy()
    side = min((p for _, _, p in lib.layers), default=0.1)
    width[term] = height[term] = side
    x = cx + core_w / 2 - width / 2
    y = cy + core_h / 2 - height / 2
    cells = np.flatnonzero(nl.kind == CELL)
    x[cells], y[cells] = _fill_rows(width[cells], cx, cy, sites, rows, site_w, row_h)
    try:
        x[term], y[term] = place_pins_evenly(die, width[term], height[term], dbu)
    except DesignError as e:
        raise DesignError(e.message, file=src, where=e.where) from None
    design = Design(nl.name, die, nl.names, nl.kind, width, height, nl.net_start, nl.pin_block,
                    nl.pin_dx, nl.pin_dy, orient_allowed=nl.orient_allowed,
                    net_names=nl.net_names, pin_names=nl.pin_names, rows=rows_d,
                    block_type=nl.masters, x=x, y=y, status=np.full(len(x), MOVABLE, np.int8),
                    dbu=dbu, source=src)
    design.lef_files = list(lib.files)
    design.routing_layers = list(lib.layers)
    design.tracks = make_tracks(die, lib.layers, dbu)
    t_names = [n for n, k in zip(nl.names, nl.kind.tolist()) if k == TERMINAL]
    design.io_directions = {n: d.upper() for n, d in zip(t_names, nl.directions)}
    return design


def load_netlist(path: str | Path, lef: str | Path | Sequence[str | Path] | None, *,
                 top: str | None = None, utilization: float | None = None,
                 aspect: float | None = None, margin: float | None = None,
                 die: Sequence[float] | None = None) -> Design:
    """Read a structural Verilog netlist with its LEF libraries and make its first floorplan.

    Parameters are those of :func:`read_verilog` (``top``) and :func:`floorplan_netlist`;
    ``lef`` lists the technology LEF first, then the cell and macro LEFs.

    Examples
    --------
    >>> d = load_netlist("blk.v.gz", ["tech.lef", "cells.lef"], utilization=0.6)  # doctest: +SKIP
    """
    lefs = [lef] if isinstance(lef, (str, Path)) else list(lef or [])
    if not lefs:
        raise DesignError("a Verilog netlist needs its LEF libraries (lef=[...])", file=str(path),
                          where="lef")
    lib = read_lef(lefs)
    return floorplan_netlist(read_verilog(path, lib, top=top), lib, utilization=utilization,
                             aspect=aspect, margin=margin, die=die)
