"""Wirelength: pin positions, net bounding boxes and half-perimeter wirelength (HPWL).

HPWL is the half-perimeter of each net's pin bounding box, with pin offsets and the block
orientation applied (:meth:`Floorplan.pin_positions`), in µm.  Vectorised over the CSR net
arrays; an early-floorplanning estimate, not a routed length.
"""

from __future__ import annotations

import numpy as np

from ..design import Design, Floorplan, orient_offsets, orient_size

__all__ = ["hpwl", "net_boxes", "net_hpwl", "nets_hpwl", "pin_positions"]



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

