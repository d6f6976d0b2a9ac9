"""Pure numpy geometry for the canvas: rectangle rows, orientation notches, flyline bundles.

Nothing here touches ipywidgets or bqplot, and nothing here places anything: these functions
turn a :class:`~floorwidget.design.Floorplan` into the arrays that the canvas marks draw.
"""

from __future__ import annotations

import numpy as np

from ..design import TERMINAL, Design, Floorplan, orient_offsets

__all__ = [
    "rect_rows",
    "notch_rows",
    "bundle_rows",
    "flyline_bundles",
    "square_view",
    "visible_rows",
    "zigzag_rows",
]


def rect_rows(rects: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Closed outlines of ``(k, 4)`` rectangles ``xlo, ylo, xhi, yhi`` as ``(k, 5)`` x and y rows.

    The corners run lower-left, lower-right, upper-right, upper-left, lower-left, so a filled
    ``Lines`` mark draws each row as one rectangle.

    Examples
    --------
    >>> x, y = rect_rows(np.array([[0.0, 0.0, 2.0, 1.0]]))
    >>> x.tolist(), y.tolist()
    ([[0.0, 2.0, 2.0, 0.0, 0.0]], [[0.0, 0.0, 1.0, 1.0, 0.0]])
    """
    r = np.asarray(rects, dtype=np.float64).reshape(-1, 4)
    x = r[:, [0, 2, 2, 0, 0]]
    y = r[:, [1, 1, 3, 3, 1]]
    return x, y


def notch_rows(design: Design, fp: Floorplan, idx: np.ndarray,
               frac: float = 0.22) -> tuple[np.ndarray, np.ndarray]:
    """Triangles marking the pin-1 (lower-left in N) corner of blocks ``idx``, oriented.

    The triangle is drawn in the N frame at the lower-left corner (legs ``frac`` of the shorter
    side) and mapped through the block's orientation with :func:`orient_offsets`, so a flip or a
    rotation moves the notch to the corner the LEF/DEF transform sends it to.

    Returns
    -------
    x, y : (k, 4) arrays
        Closed triangles (the fourth point repeats the first).
    """
    idx = np.asarray(idx, dtype=np.intp)
    w0, h0 = design.width[idx], design.height[idx]
    a = frac * np.minimum(w0, h0)
    # N-frame offsets from the centre: the corner and the two leg ends
    dx = np.stack([-w0 / 2, -w0 / 2 + a, -w0 / 2, -w0 / 2], axis=1)
    dy = np.stack([-h0 / 2, -h0 / 2, -h0 / 2 + a, -h0 / 2], axis=1)
    ox, oy = orient_offsets(dx, dy, fp.orient[idx][:, None])
    cx, cy = fp.centres()
    return cx[idx][:, None] + ox, cy[idx][:, None] + oy


def flyline_bundles(design: Design, fp: Floorplan, blocks, max_degree: int = 64,
                    limit: int = 400) -> tuple[np.ndarray, np.ndarray]:
    """Neighbours of ``blocks`` and the number of nets each shares with them.

    Nets of more than ``max_degree`` pins are left out (they would tie the macro to everything).
    Each neighbour appears once however many nets it shares: that is the bundle.

    Returns
    -------
    neighbours, counts : int arrays
        At most ``limit`` neighbours, the ones sharing most nets first.
    """
    blocks = np.atleast_1d(np.asarray(blocks, dtype=np.intp))
    if blocks.size == 0 or design.num_nets == 0:
        return np.zeros(0, np.intp), np.zeros(0, np.int64)
    nets = design.nets_of(blocks)
    deg = design.net_degree[nets]
    nets = nets[deg <= max_degree]
    if nets.size == 0:
        return np.zeros(0, np.intp), np.zeros(0, np.int64)
    starts = design.net_start[nets]
    lens = design.net_start[nets + 1] - starts
    # pins of the chosen nets, without a Python loop: a ragged arange
    offs = np.repeat(starts - np.cumsum(np.concatenate([[0], lens[:-1]])), lens)
    pin = offs + np.arange(int(lens.sum()))
    net_of_pin = np.repeat(np.arange(len(nets)), lens)
    blk = design.pin_block[pin]
    keep = ~np.isin(blk, blocks)
    pairs = np.unique(np.stack([net_of_pin[keep], blk[keep]], axis=1), axis=0)
    if len(pairs) == 0:
        return np.zeros(0, np.intp), np.zeros(0, np.int64)
    nb, counts = np.unique(pairs[:, 1], return_counts=True)
    order = np.argsort(-counts, kind="stable")[:limit]
    return nb[order].astype(np.intp), counts[order]


def bundle_rows(x0: float, y0: float, x1: np.ndarray, y1: np.ndarray,
                width: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Thin closed quadrilaterals from ``(x0, y0)`` to each ``(x1, y1)``, ``width`` wide.

    A filled ``Lines`` mark cannot vary its stroke per line, so a bundle's thickness is drawn as a
    polygon of that width (in data units) instead.
    """
    x1 = np.asarray(x1, dtype=np.float64)
    y1 = np.asarray(y1, dtype=np.float64)
    dx, dy = x1 - x0, y1 - y0
    ln = np.hypot(dx, dy)
    ln = np.where(ln > 0, ln, 1.0)
    nx, ny = -dy / ln * width / 2, dx / ln * width / 2
    xs = np.stack([x0 + nx, x1 + nx, x1 - nx, x0 - nx, x0 + nx], axis=1)
    ys = np.stack([y0 + ny, y1 + ny, y1 - ny, y0 - ny, y0 + ny], axis=1)
    return xs, ys


def square_view(design: Design, margin: float = 0.03) -> tuple[float, float, float, float]:
    """Equal-span x and y ranges around the die (``xmin, xmax, ymin, ymax``), so µm are square."""
    d = design.die
    span = max(d[2] - d[0], d[3] - d[1]) * (1 + 2 * margin)
    cx, cy = (d[0] + d[2]) / 2, (d[1] + d[3]) / 2
    return cx - span / 2, cx + span / 2, cy - span / 2, cy + span / 2


def visible_rows(design: Design, ylo: float, yhi: float, xlo: float, xhi: float,
                 limit: int = 300) -> np.ndarray:
    """Indices of placement rows inside the view, or none when more than ``limit`` would show."""
    if len(design.row_y) == 0:
        return np.zeros(0, np.intp)
    xr = design.row_x + design.row_site_width * design.row_num_sites
    m = ((design.row_y + design.row_height > ylo) & (design.row_y < yhi)
         & (xr > xlo) & (design.row_x < xhi))
    idx = np.flatnonzero(m)
    return idx if len(idx) <= limit else np.zeros(0, np.intp)


def terminal_xy(design: Design, fp: Floorplan) -> tuple[np.ndarray, np.ndarray]:
    """Centres of the I/O terminals."""
    t = design.kind == TERMINAL
    cx, cy = fp.centres()
    return cx[t], cy[t]


def zigzag_rows(strips: np.ndarray, vertical: np.ndarray,
                max_teeth: int = 24) -> tuple[np.ndarray, np.ndarray]:
    """A zigzag across each strip, as a hatch that one ``Lines`` row can draw.

    The line runs from one long side of the strip to the other and back, advancing along the
    strip by its width each time (so the teeth are at 45 degrees), with at most ``max_teeth``
    crossings (wider teeth on long strips); rows are padded by repeating their last point.

    Parameters
    ----------
    strips : (k, 4) array of ``xlo, ylo, xhi, yhi``
    vertical : (k,) bool array
        True for strips that run up and down (their width is along x).

    Returns
    -------
    x, y : (k, max_teeth + 1) arrays
    """
    s = np.asarray(strips, dtype=np.float64).reshape(-1, 4)
    v = np.asarray(vertical, bool).reshape(-1)
    across = np.where(v, s[:, 2] - s[:, 0], s[:, 3] - s[:, 1])
    along = np.where(v, s[:, 3] - s[:, 1], s[:, 2] - s[:, 0])
    teeth = np.clip(np.floor(along / np.maximum(across, 1e-12)), 1, max_teeth).astype(np.intp)
    k = np.arange(max_teeth + 1)[None, :]
    t = np.minimum(k, teeth[:, None]) / teeth[:, None]        # 0 .. 1 along the strip
    side = (np.minimum(k, teeth[:, None]) % 2).astype(np.float64)  # 0, 1, 0, ... across
    lo_a = np.where(v, s[:, 1], s[:, 0])[:, None]
    lo_c = np.where(v, s[:, 0], s[:, 1])[:, None]
    pa = lo_a + t * along[:, None]
    pc = lo_c + side * across[:, None]
    return np.where(v[:, None], pc, pa), np.where(v[:, None], pa, pc)
