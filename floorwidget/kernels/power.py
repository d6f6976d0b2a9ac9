"""Power-grid shapes as arrays, and the geometry rules on them that several layers share.

:class:`PowerShapes` is the drawn power grid of a design: one row per rectangle with its
routing layer, net (VDD or VSS) and kind (DEF ``SHAPE RING``, ``STRIPE`` or ``FOLLOWPIN``).
The specification an engineer sets and the generator live in
:mod:`floorwidget.floorplan.power`; the DEF reader and writers, the placer, the report, the
canvas and ``render`` work on these arrays only.

The *channel rule* (:func:`channel_conflicts`, one implementation for the placer's repair and
the report's ``straps_blocked``): macros obstruct the *low* routing layers, so a stripe on a
low layer may either pass over a macro (it is cut there) or run in a channel beside it, but it
may not clip a macro's edge.  Precisely: take a stripe's band across its direction, widened by
the grid spacing on both sides (for a vertical stripe ``[x0 − s, x1 + s]``); a macro footprint
whose extent along the stripe overlaps the stripe violates the rule when its extent across
the stripe overlaps that band without containing it.  So a channel between two macros either
holds a whole stripe with its spacing to both macros, or no stripe.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

__all__ = ["FOLLOWPIN", "NETS", "RING", "SHAPES", "STRIPE", "PowerShapes", "channel_conflicts",
           "cut_rects", "ring_rects"]

RING, STRIPE, FOLLOWPIN = 0, 1, 2
SHAPES = ("RING", "STRIPE", "FOLLOWPIN")
NETS = ("VDD", "VSS")


def _arr(a, shape, dtype=np.float64) -> np.ndarray:
    out = np.ascontiguousarray(np.asarray(a, dtype=dtype).reshape(shape))
    out.flags.writeable = False
    return out


@dataclass(frozen=True, eq=False)
class PowerShapes:
    """The rectangles of a power grid, struct of arrays (µm).

    Attributes
    ----------
    layers : tuple of str
        Routing layer names that ``layer`` indexes.
    low : (len(layers),) bool
        Per layer: a low layer (macros obstruct it; stripes on it are partial placement
        blockages for standard cells and obey the channel rule).
    rects : (k, 4) float
        ``xlo, ylo, xhi, yhi`` of each shape.
    layer, net, shape : (k,) int
        Layer index, net index into :data:`NETS`, kind index into :data:`SHAPES`.
    width : (k,) float
        The DEF wire width of each shape (its narrow side).
    spacing : float
        Spacing kept between a stripe and a macro (the channel rule).
    cell_density : float
        The largest share of a low stripe's area standard cells may fill (its partial
        blockage density).
    spec : dict or None
        The specification the shapes were made from (JSON form), None when read from DEF.
    macro_rings : tuple of str
        Names of the macros that get rings of their own (made for a floorplan by
        :meth:`for_macros`; not in ``rects``).  Names, not indices, so that the grid carries
        over to a clustered version of the design and back.
    """

    layers: tuple[str, ...]
    low: np.ndarray
    rects: np.ndarray
    layer: np.ndarray
    net: np.ndarray
    shape: np.ndarray
    width: np.ndarray
    spacing: float = 0.0
    cell_density: float = 0.5
    spec: dict | None = None
    macro_rings: tuple[str, ...] = field(default=())

    def __post_init__(self) -> None:
        k = len(np.asarray(self.rects).reshape(-1, 4))
        object.__setattr__(self, "layers", tuple(map(str, self.layers)))
        object.__setattr__(self, "low", _arr(self.low, (len(self.layers),), bool))
        object.__setattr__(self, "rects", _arr(self.rects, (k, 4)))
        for a, dt in (("layer", np.int16), ("net", np.int8), ("shape", np.int8),
                      ("width", np.float64)):
            object.__setattr__(self, a, _arr(getattr(self, a), (k,), dt))

    def __len__(self) -> int:
        return len(self.rects)

    def select(self, mask) -> PowerShapes:
        """The shapes where ``mask`` holds (same layers and settings)."""
        m = np.asarray(mask)
        return replace(self, rects=self.rects[m], layer=self.layer[m], net=self.net[m],
                       shape=self.shape[m], width=self.width[m])

    def extended(self, rects, layer, net, shape, width) -> PowerShapes:
        """These shapes and the given ones."""
        return replace(self, rects=np.concatenate([self.rects, np.reshape(rects, (-1, 4))]),
                       layer=np.concatenate([self.layer, layer]),
                       net=np.concatenate([self.net, net]),
                       shape=np.concatenate([self.shape, shape]),
                       width=np.concatenate([self.width, width]))

    def vertical(self) -> np.ndarray:
        """``(k,)`` whether each shape runs vertically (taller than wide)."""
        r = self.rects
        return (r[:, 3] - r[:, 1]) > (r[:, 2] - r[:, 0])

    def low_stripes(self) -> np.ndarray:
        """``(k,)`` the stripes the placer honours (partial blockages, channel rule): those on
        low layers of a grid made from a specification; none of a grid read from DEF
        (:attr:`spec` None), which is drawn and written back only."""
        return (self.shape == STRIPE) & self.low[self.layer] & (self.spec is not None)

    def for_macros(self, foot: np.ndarray, ring_boxes: np.ndarray) -> PowerShapes:
        """The grid as drawn around the macro footprints ``foot`` (m, 4) of a floorplan:
        stripes and followpins on low layers cut where they cross a macro (clear of it by
        :attr:`spacing`), and a VDD/VSS ring pair around each of ``ring_boxes`` (the
        footprints of :attr:`macro_rings`) with the ring settings of :attr:`spec`."""
        cut = (self.shape != RING) & self.low[self.layer]
        pieces, src = cut_rects(self.rects[cut], self.vertical()[cut], foot, self.spacing)
        src = np.flatnonzero(cut)[src]
        out = self.select(~cut).extended(pieces, self.layer[src], self.net[src],
                                         self.shape[src], self.width[src])
        boxes = np.asarray(ring_boxes, np.float64).reshape(-1, 4)
        if len(boxes) and self.spec and self.spec.get("ring_layers"):
            sp, names = self.spec, list(self.layers)
            lay = (names.index(sp["ring_layers"][0]), names.index(sp["ring_layers"][1]))
            r, layer, net = ring_rects(boxes, sp["ring_width"], sp["ring_spacing"],
                                       sp["ring_offset"], lay)
            out = out.extended(r, layer, net, np.full(len(r), RING),
                               np.full(len(r), float(sp["ring_width"])))
        return out


def ring_rects(boxes: np.ndarray, width: float, spacing: float, offset: float,
               layers: tuple[int, int]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A VDD ring (inner) and a VSS ring (outer) around each box.

    Ring ``k`` (0 VDD, 1 VSS) has its inner edge ``offset + k (width + spacing)`` outside the
    box; its bottom and top sides are on ``layers[0]`` (horizontal), its left and right sides
    on ``layers[1]`` (vertical), the sides overlapping at the corners.

    Returns
    -------
    rects : (8 b, 4) array
    layer, net : (8 b,) int arrays
    """
    b = np.asarray(boxes, np.float64).reshape(-1, 4)
    k = np.array([0, 1])
    inner = offset + k * (width + spacing)               # (2,)
    lo = b[:, None, :2] - inner[None, :, None]           # (b, 2, 2) inner lower-left
    hi = b[:, None, 2:] + inner[None, :, None]
    olo, ohi = lo - width, hi + width                    # outer corners
    bottom = np.stack([olo[..., 0], olo[..., 1], ohi[..., 0], lo[..., 1]], -1)
    top = np.stack([olo[..., 0], hi[..., 1], ohi[..., 0], ohi[..., 1]], -1)
    left = np.stack([olo[..., 0], olo[..., 1], lo[..., 0], ohi[..., 1]], -1)
    right = np.stack([hi[..., 0], olo[..., 1], ohi[..., 0], ohi[..., 1]], -1)
    rects = np.stack([bottom, top, left, right], axis=2)  # (b, 2 rings, 4 sides, 4)
    net = np.broadcast_to(k[None, :, None], rects.shape[:3])
    layer = np.broadcast_to(np.array([layers[0], layers[0], layers[1], layers[1]]),
                            rects.shape[:3])
    return rects.reshape(-1, 4), layer.reshape(-1), net.reshape(-1)


def cut_rects(rects: np.ndarray, vertical: np.ndarray, obstacles: np.ndarray,
              spacing: float = 0.0) -> tuple[np.ndarray, np.ndarray]:
    """The parts of long rectangles outside the obstacles.

    A rectangle is cut along its length wherever an obstacle, grown by ``spacing`` along that
    length, crosses its band; pieces shorter than the rectangle's width are dropped.

    Returns
    -------
    pieces : (p, 4) array
    source : (p,) int array
        Which input rectangle each piece came from, ascending.
    """
    rects = np.asarray(rects, np.float64).reshape(-1, 4)
    obs = np.asarray(obstacles, np.float64).reshape(-1, 4)
    vertical = np.asarray(vertical, bool).reshape(len(rects))
    ax = np.where(vertical, 1, 0)  # the axis a rectangle runs along
    a_lo, a_hi = rects[np.arange(len(rects)), ax], rects[np.arange(len(rects)), ax + 2]
    c_lo, c_hi = rects[np.arange(len(rects)), 1 - ax], rects[np.arange(len(rects)), 3 - ax]
    oa_lo, oa_hi = obs[None, :, 0] * ~vertical[:, None] + obs[None, :, 1] * vertical[:, None], \
        obs[None, :, 2] * ~vertical[:, None] + obs[None, :, 3] * vertical[:, None]
    oc_lo, oc_hi = obs[None, :, 1] * ~vertical[:, None] + obs[None, :, 0] * vertical[:, None], \
        obs[None, :, 3] * ~vertical[:, None] + obs[None, :, 2] * vertical[:, None]
    lo_cut, hi_cut = oa_lo - spacing, oa_hi + spacing
    hit = ((oc_lo < c_hi[:, None]) & (oc_hi > c_lo[:, None])
           & (lo_cut < a_hi[:, None]) & (hi_cut > a_lo[:, None]))
    whole = ~hit.any(axis=1)
    pieces, src = [rects[whole]], [np.flatnonzero(whole)]
    for i in np.flatnonzero(~whole):  # only rectangles some obstacle crosses (few)
        lo, hi = lo_cut[i, hit[i]], hi_cut[i, hit[i]]
        order = np.argsort(lo)
        lo, hi = lo[order], np.maximum.accumulate(hi[order])
        # free spans: from the rectangle's start and each cut's end to the next cut's start
        s = np.concatenate([[a_lo[i]], hi])
        e = np.concatenate([lo, [a_hi[i]]])
        s[1:] = np.maximum(s[1:], a_lo[i])
        e[:-1] = np.minimum(e[:-1], a_hi[i])
        ok = e - s >= (c_hi[i] - c_lo[i]) - 1e-12
        ok &= e > s
        p = np.repeat(rects[i:i + 1], int(ok.sum()), axis=0)
        p[:, ax[i]], p[:, ax[i] + 2] = s[ok], e[ok]
        pieces.append(p)
        src.append(np.full(len(p), i))
    pieces_a, source = np.concatenate(pieces), np.concatenate(src).astype(np.int64)
    order = np.argsort(source, kind="stable")
    return pieces_a[order], source[order]


def channel_conflicts(stripes: np.ndarray, spacing: float, foot: np.ndarray
                      ) -> tuple[np.ndarray, np.ndarray]:
    """``(stripe, macro)`` index pairs that break the channel rule (module docstring).

    Parameters
    ----------
    stripes : (s, 4) array
        Stripes on low layers (each runs along its longer side).
    spacing : float
        Spacing a stripe keeps from a macro it does not pass over.
    foot : (m, 4) array
        Macro footprints.
    """
    st = np.asarray(stripes, np.float64).reshape(-1, 4)
    f = np.asarray(foot, np.float64).reshape(-1, 4)
    if not len(st) or not len(f):
        return np.zeros(0, np.int64), np.zeros(0, np.int64)
    v = ((st[:, 3] - st[:, 1]) > (st[:, 2] - st[:, 0]))[:, None]
    # across: x for vertical stripes, y for horizontal ones; along: the other axis
    b_lo = np.where(v, st[:, 0:1], st[:, 1:2]) - spacing
    b_hi = np.where(v, st[:, 2:3], st[:, 3:4]) + spacing
    f_lo = np.where(v, f[None, :, 0], f[None, :, 1])
    f_hi = np.where(v, f[None, :, 2], f[None, :, 3])
    a_lo = np.where(v, st[:, 1:2], st[:, 0:1])
    a_hi = np.where(v, st[:, 3:4], st[:, 2:3])
    g_lo = np.where(v, f[None, :, 1], f[None, :, 0])
    g_hi = np.where(v, f[None, :, 3], f[None, :, 2])
    eps = 1e-9
    along = (g_lo < a_hi - eps) & (g_hi > a_lo + eps)
    across = (f_lo < b_hi - eps) & (f_hi > b_lo + eps)
    inside = (f_lo <= b_lo + eps) & (f_hi >= b_hi - eps)
    s, m = np.nonzero(along & across & ~inside)
    return s, m
