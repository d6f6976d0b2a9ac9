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
    "net_bundles",
    "png_rgba",
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


def _net_pins(design: Design, nets: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Pins of ``nets`` and the net of each pin (a ragged arange, no loop)."""
    starts = design.net_start[nets]
    lens = design.net_start[nets + 1] - starts
    offs = np.repeat(starts - np.cumsum(np.concatenate([[0], lens[:-1]])), lens)
    return offs + np.arange(int(lens.sum())), np.repeat(nets, lens)


def _small_nets(design: Design, blocks: np.ndarray, max_degree: int) -> np.ndarray:
    if blocks.size == 0:
        return np.zeros(0, np.intp)
    nets = design.nets_of(blocks)
    return nets[design.net_degree[nets] <= max_degree]


def net_bundles(design: Design, blocks, target_of: np.ndarray | None = None, *,
                through: np.ndarray | None = None, max_degree: int = 64, limit: int = 400
                ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Bundles of the nets from ``blocks`` to targets: each target once, weighted by nets.

    ``target_of`` maps every block to a target id (a macro to itself, the terminals of one I/O
    bus to the bus, the cells of one hierarchy group to the group, ``-1`` to none); the weight
    of a target is the number of distinct nets joining ``blocks`` to any block of it.  Nets of
    more than ``max_degree`` pins are left out (they would tie the source to everything).

    With ``through`` (a block mask, e.g. the standard cells), the bundles are those of the
    second ring instead: the nets of the ``through`` blocks that ``blocks`` reach by a net,
    other than those first nets; a target is then joined through one such block.

    Returns
    -------
    targets, counts : int arrays
        At most ``limit`` targets, the ones with most nets first.
    pair_target, pair_block : int arrays
        Every (target, block) reached, for drawing each bundle to the middle of the blocks it
        reaches.
    """
    n = design.num_blocks
    src = np.zeros(n, bool)
    blocks = np.atleast_1d(np.asarray(blocks, dtype=np.intp))
    src[blocks] = True
    tgt = np.arange(n) if target_of is None else np.asarray(target_of, dtype=np.intp)
    empty = np.zeros(0, np.intp)
    nets = _small_nets(design, blocks, max_degree)
    if through is not None and nets.size:
        pin, _ = _net_pins(design, nets)
        blk = design.pin_block[pin]
        mid = np.unique(blk[np.asarray(through, bool)[blk] & ~src[blk]])
        nets = np.setdiff1d(_small_nets(design, mid, max_degree), nets, assume_unique=True)
        src[mid] = True  # the cells passed through are not targets of the second ring
    if nets.size == 0:
        return empty, empty.astype(np.int64), empty, empty
    pin, net_of_pin = _net_pins(design, nets)
    blk = design.pin_block[pin]
    keep = ~src[blk] & (tgt[blk] >= 0)
    blk, net_of_pin = blk[keep], net_of_pin[keep]
    t = tgt[blk]
    pairs = np.unique(np.stack([net_of_pin, t], axis=1), axis=0)
    if len(pairs) == 0:
        return empty, empty.astype(np.int64), empty, empty
    targets, counts = np.unique(pairs[:, 1], return_counts=True)
    order = np.argsort(-counts, kind="stable")[:limit]
    targets, counts = targets[order].astype(np.intp), counts[order]
    tb = np.unique(np.stack([t, blk], axis=1), axis=0)
    tb = tb[np.isin(tb[:, 0], targets)]
    return targets, counts, tb[:, 0].astype(np.intp), tb[:, 1].astype(np.intp)


def flyline_bundles(design: Design, fp: Floorplan, blocks, max_degree: int = 64,
                    limit: int = 400) -> tuple[np.ndarray, np.ndarray]:
    """Neighbours of ``blocks`` and the number of nets each shares with them.

    Nets of more than ``max_degree`` pins are left out (they would tie the macro to everything).
    Each neighbour appears once however many nets it shares: that is the bundle
    (:func:`net_bundles` with every block its own target).

    Returns
    -------
    neighbours, counts : int arrays
        At most ``limit`` neighbours, the ones sharing most nets first.
    """
    nb, counts, _, _ = net_bundles(design, blocks, max_degree=max_degree, limit=limit)
    return nb, counts


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


def png_rgba(rgba: np.ndarray) -> bytes:
    """A PNG file (8-bit RGBA, no filter) of an ``(h, w, 4)`` uint8 array, top row first.

    Written with zlib alone (PNG specification, W3C Recommendation, 2003: signature, IHDR,
    one IDAT, IEND, CRC-32 per chunk), so the canvas needs no imaging package.
    """
    import struct
    import zlib

    a = np.ascontiguousarray(rgba, dtype=np.uint8)
    h, w = a.shape[:2]
    raw = np.concatenate([np.zeros((h, 1), np.uint8), a.reshape(h, w * 4)], axis=1).tobytes()

    def chunk(kind: bytes, data: bytes) -> bytes:
        return (struct.pack(">I", len(data)) + kind + data
                + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF))

    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, 8, 6, 0, 0, 0))
            + chunk(b"IDAT", zlib.compress(raw, 6)) + chunk(b"IEND", b""))
