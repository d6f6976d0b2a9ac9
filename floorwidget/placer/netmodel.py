"""The Bound2Bound net model, vectorised over the CSR net arrays.

For a net of ``p`` pins the model connects the two *bound* pins (leftmost and rightmost along
the axis) to each other and every inner pin to both bounds, each connection ``(i, j)`` weighted

.. math:: w_{ij} = \\frac{2}{p - 1} \\cdot \\frac{1}{\\max(|x_i - x_j|, \\varepsilon)} .

At the positions it was built from, the quadratic cost ``½ Σ w_ij (x_i - x_j)²`` of a net equals
its half-perimeter extent along that axis (the property the method is built on): the bound edge
contributes the span ``L`` once and every inner pin ``|x_k - x_l| + |x_u - x_k| = L``, so the
``2p - 3`` connections add up to ``(p - 1) L`` before the ``2/(p - 1)`` factor and ½.
Two-pin nets become one connection, large nets ``2p - 3`` connections: no cliques.

References
----------
P. Spindler, U. Schlichtmann, F. M. Johannes, IEEE Trans. Computer-Aided Design of Integrated
Circuits and Systems 27(8), 2008.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

__all__ = ["NetTopology", "b2b_edges", "b2b_cost"]


@dataclass
class NetTopology:
    """Nets with at least two pins, as CSR arrays, with the weight multipliers folded in.

    Attributes
    ----------
    start : (m + 1,) int64
        CSR index into the pin arrays.
    pin : (P,) int64
        Index of the pin in the design's pin arrays.
    block : (P,) int64
        Block of each pin.
    net : (P,) int64
        Net (0..m-1 in this topology) of each pin.
    weight : (m,) float64
        Net weight times ``2 / (p - 1)``.
    """

    start: np.ndarray
    pin: np.ndarray
    block: np.ndarray
    net: np.ndarray
    weight: np.ndarray

    @classmethod
    def from_design(cls, design, multiplier=1.0, only=None) -> NetTopology:
        """The nets of ``design`` with two pins or more and a positive weight; with ``only`` (a
        block mask) just those touching one of those blocks (a net of fixed blocks alone adds
        a constant to the quadratic cost and nothing to its system)."""
        deg = np.diff(design.net_start)
        keep = deg >= 2
        w = design.net_weight * multiplier
        keep &= np.broadcast_to(w > 0, keep.shape)
        if only is not None and not np.all(only):
            hit = np.zeros(len(deg), bool)
            hit[design.pin_net[np.asarray(only, bool)[design.pin_block]]] = True
            keep &= hit
        if keep.all():
            pins = np.arange(design.num_pins)
            start = design.net_start
        else:
            pins = np.flatnonzero(np.repeat(keep, deg))
            start = np.concatenate([[0], np.cumsum(deg[keep])]).astype(np.int64)
        d = np.diff(start)
        net = np.repeat(np.arange(len(d)), d)
        wk = np.broadcast_to(w, deg.shape)[keep].astype(np.float64)
        return cls(start=np.ascontiguousarray(start, np.int64), pin=pins,
                   block=design.pin_block[pins], net=net, weight=2.0 * wk / (d - 1))

    @property
    def num_nets(self) -> int:
        return len(self.start) - 1


def _bounds(coord: np.ndarray, start: np.ndarray, net: np.ndarray):
    """Index (into ``coord``) of the lowest and highest pin of every net.

    Ties go to the first pin for the lower bound and the last pin for the upper one, so the two
    bounds are distinct even when every pin of a net sits at the same coordinate.
    """
    p = len(coord)
    s = start[:-1]
    mn = np.minimum.reduceat(coord, s)
    mx = np.maximum.reduceat(coord, s)
    idx = np.arange(p)
    lo = np.minimum.reduceat(np.where(coord == mn[net], idx, p), s)
    hi = np.maximum.reduceat(np.where(coord == mx[net], idx, -1), s)
    return lo, hi


def b2b_edges(coord: np.ndarray, topo: NetTopology, eps: float):
    """Bound2Bound connections of every net along one axis.

    Parameters
    ----------
    coord : (P,) float64
        Pin coordinates along the axis, in the topology's pin order (block centre plus the
        oriented pin offset).
    topo : NetTopology
        The nets.
    eps : float
        Lower limit on the distance in the weight (µm), so coincident pins stay finite.

    Returns
    -------
    a, b : (E,) int64
        Pin indices (into ``coord``) of each connection.
    w : (E,) float64
        Connection weights ``net_weight * 2 / ((p - 1) * max(|x_a - x_b|, eps))``.

    Examples
    --------
    >>> import numpy as np
    >>> t = NetTopology(np.array([0, 3]), np.arange(3), np.arange(3), np.zeros(3, int),
    ...                 np.array([1.0]))     # weight already 2/(p-1) = 1 for p = 3
    >>> a, b, w = b2b_edges(np.array([0.0, 4.0, 1.0]), t, 1e-9)
    >>> a.tolist(), b.tolist(), w.tolist()
    ([0, 2, 2], [1, 0, 1], [0.25, 1.0, 0.3333333333333333])
    """
    lo, hi = _bounds(coord, topo.start, topo.net)
    idx = np.arange(len(coord))
    net = topo.net
    inner = (idx != lo[net]) & (idx != hi[net])
    k = idx[inner]
    kn = net[inner]
    a = np.concatenate([lo, k, k])
    b = np.concatenate([hi, lo[kn], hi[kn]])
    en = np.concatenate([np.arange(topo.num_nets), kn, kn])
    d = np.abs(coord[a] - coord[b])
    w = topo.weight[en] / np.maximum(d, eps)
    return a, b, w


def b2b_cost(coord: np.ndarray, topo: NetTopology, eps: float = 1e-12) -> float:
    """``½ Σ w (x_a − x_b)²`` of the model built at ``coord`` itself (equals the weighted
    half-perimeter extent along the axis when no two bound pins are closer than ``eps``)."""
    a, b, w = b2b_edges(coord, topo, eps)
    return 0.5 * float(np.sum(w * (coord[a] - coord[b]) ** 2))
