"""The floorplan's shape: channels between facing macros, pins facing a wall, macros on the
periphery, and the logic regions the macros leave.

Early-floorplanning rules of thumb (common practice, no single source): hard macros sit
against the core boundary or against each other, pin side toward the logic, with the channel
between two facing macros either closed (halos touching) or wide enough to route and power,
and the standard-cell area left in one piece.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..design import MACRO, Design, Floorplan, orient_offsets
from ..kernels.rects import TOL, clip, overlap_pairs

__all__ = ["Channels", "LogicRegions", "channel_gaps", "default_channel", "facing_wall",
           "logic_regions", "macros_facing_wall", "narrow_channels", "nearest_wall",
           "periphery_macros", "pin_side", "wall_bars"]

#: Default channel between facing macros, in (median) row heights (common practice: a few
#: rows, room for routing and a power strap); see :func:`default_channel`.
DEFAULT_CHANNEL_ROWS = 4



def default_channel(design: Design) -> float:
    """The default channel width (µm): :data:`DEFAULT_CHANNEL_ROWS` median row heights, or
    1 % of the shorter core side for a design without rows.  Two facing macros are either
    abutted (halos only) or at least this far apart."""
    if len(design.row_height):
        return DEFAULT_CHANNEL_ROWS * float(np.median(design.row_height))
    c = design.core
    return 0.01 * float(min(c[2] - c[0], c[3] - c[1]))




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
    a, b = overlap_pairs(f + np.array([-ch, -ch, ch, ch]) / 2, tol=TOL)
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
        s_i, m_i = overlap_pairs(strips, f, TOL)
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
    a, b = overlap_pairs(fp.rects(halo=True)[mac] + np.array([-TOL, -TOL, TOL, TOL]))
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
    obs = clip(obs, c)
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
