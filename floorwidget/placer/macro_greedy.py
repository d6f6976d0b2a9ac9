"""Greedy macro placement by a wire mask: arrays placed one at a time where they add least
wirelength, off the logic where they can.

Shi, Xue, Song, Qian (NeurIPS 2023, from memory) place macros one by one, each at the grid
position that adds the least HPWL to the nets already placed, with a mask of the positions
that would overlap; they show that this simple greedy rule beats learned placers on the
standard suites.  Here the "macros" are arrays (:class:`~floorwidget.placer.macro_arrays.
ArrayPlan`): the cost of a position is

    ΔHPWL of the array's nets  +  ``displace`` × standard-cell area the array would cover,

with the cells, clusters and terminals where the global placement put them, and the arrays
already placed at their new positions (arrays not yet placed do not count).  The second term
keeps arrays off the dense logic, so the logic stays in one piece and the arrays settle around
it, next to the cells they talk to.  The mask keeps the halo rule (with the arrays' channel
halos) against arrays already placed, fixed and pinned macros and keep-outs; footprints stay in
the core and halos in the die.

Both cost terms are separable or box sums over a lattice of candidate corners, so one array
costs O(nets × lattice side + lattice) numpy work; nets of more than :data:`MAX_NET_PINS` pins
(clock, reset) add the same to every position near the logic and are left out.

The results are early-floorplanning estimates; sign-off belongs to the implementation flow.
"""

from __future__ import annotations

import numpy as np

from ..design import CELL, CLUSTER, MACRO, MOVABLE, Design, Floorplan, orient_offsets
from ..metrics import pin_positions
from .macro_arrays import ArrayPlan, shape_options

__all__ = ["MAX_NET_PINS", "greedy_arrays"]

MAX_NET_PINS = 1000  # nets with more pins are left out of the wirelength term
LATTICE = 160        # candidate corners along the longer core side (at least the grid pitch)


def _member_offsets(design: Design, fp: Floorplan, plan: ArrayPlan, a: int):
    """Pins of array ``a`` in its current shape: their indices and offsets from the array's
    lower-left corner."""
    mem = plan.members[a]
    c = int(plan.cols[a])
    slot = np.arange(len(mem))
    sx = (slot % c) * plan.pitch[a, 0]
    sy = (slot // c) * plan.pitch[a, 1]
    w, h = fp.sizes()
    where = np.full(design.num_blocks, -1, np.intp)
    where[mem] = slot
    pins = np.flatnonzero(where[design.pin_block] >= 0)
    b = design.pin_block[pins]
    ox, oy = orient_offsets(design.pin_dx[pins], design.pin_dy[pins], fp.orient[b])
    k = where[b]
    return pins, sx[k] + w[b] / 2 + ox, sy[k] + h[b] / 2 + oy


def _axis_cost(pos: np.ndarray, lo: np.ndarray, hi: np.ndarray, omin: np.ndarray,
               omax: np.ndarray, wt: np.ndarray) -> np.ndarray:
    """Σ_n wt_n × (extent of [lo_n, hi_n] ∪ [pos + omin_n, pos + omax_n]) for every ``pos``
    (nets without other pins have ``lo > hi`` and add a constant, left out)."""
    has = lo <= hi
    if not has.any():
        return np.zeros(len(pos))
    lo, hi, omin, omax, wt = lo[has], hi[has], omin[has], omax[has], wt[has]
    p = pos[None, :]
    ext = np.maximum(hi[:, None], p + omax[:, None]) - np.minimum(lo[:, None], p + omin[:, None])
    return wt @ ext


def _box_sums(area: np.ndarray, kx: int, ky: int) -> np.ndarray:
    """Sum of ``area`` over every ``kx × ky`` window (the window at ``[i, j]`` starts there);
    windows are clipped at the far edges."""
    s = np.zeros((area.shape[0] + 1, area.shape[1] + 1))
    s[1:, 1:] = area.cumsum(0).cumsum(1)
    nx, ny = area.shape
    i = np.arange(nx)
    j = np.arange(ny)
    i1 = np.minimum(i + kx, nx)
    j1 = np.minimum(j + ky, ny)
    return s[i1][:, j1] - s[i][:, j1] - s[i1][:, j] + s[i][:, j]


class _Lattice:
    """Candidate lower-left corners on the placement grid, about :data:`LATTICE` along the
    longer core side, and the standard-cell area per lattice cell."""

    def __init__(self, design: Design, fp: Floorplan):
        c = design.core
        gx, gy = design.grid_pitch
        g0 = design.grid_origin
        side = max(c[2] - c[0], c[3] - c[1]) / LATTICE
        self.step = np.array([max(np.ceil(side / gx), 1) * gx, max(np.ceil(side / gy), 1) * gy])
        x0 = g0[0] + np.ceil((c[0] - g0[0]) / gx - 1e-9) * gx
        y0 = g0[1] + np.ceil((c[1] - g0[1]) / gy - 1e-9) * gy
        self.xs = x0 + self.step[0] * np.arange(int((c[2] - x0) // self.step[0]) + 1)
        self.ys = y0 + self.step[1] * np.arange(int((c[3] - y0) // self.step[1]) + 1)
        soft = ((design.kind == CELL) | (design.kind == CLUSTER)) & (fp.status == MOVABLE)
        w, h = fp.sizes()
        cx, cy = fp.centres()
        ix = np.clip(((cx[soft] - x0) // self.step[0]).astype(np.intp), 0, len(self.xs) - 1)
        iy = np.clip(((cy[soft] - y0) // self.step[1]).astype(np.intp), 0, len(self.ys) - 1)
        self.area = np.zeros((len(self.xs), len(self.ys)))
        np.add.at(self.area, (ix, iy), w[soft] * h[soft])

    def span(self, rect: np.ndarray, sep: np.ndarray, w: float, h: float) -> tuple[int, ...]:
        """Index ranges of the corners where a ``w × h`` footprint would come within ``sep``
        (left, bottom, right, top of ``rect``) of ``rect``."""
        xs, ys = self.xs, self.ys
        i0 = int(np.searchsorted(xs, rect[0] - sep[0] - w, "right"))
        i1 = int(np.searchsorted(xs, rect[2] + sep[2], "left"))
        j0 = int(np.searchsorted(ys, rect[1] - sep[1] - h, "right"))
        j1 = int(np.searchsorted(ys, rect[3] + sep[3], "left"))
        return i0, i1, j0, j1


def _mask(design: Design, lat: _Lattice, w: float, h: float, halo: np.ndarray,
          obstacles: list) -> np.ndarray:
    """Corners where a ``w × h`` footprint with ``halo`` is illegal: outside the core (its
    halo outside the die), or against an obstacle ``(rect, halo)`` under the halo rule (the
    larger facing halo), or on a keep-out (``halo`` None)."""
    c, die = design.core, design.die
    xs, ys = lat.xs, lat.ys
    mask = np.zeros((len(xs), len(ys)), bool)
    mask[(xs + w > c[2] + 1e-9) | (xs - halo[0] < die[0] - 1e-9)
         | (xs + w + halo[2] > die[2] + 1e-9), :] = True
    mask[:, (ys + h > c[3] + 1e-9) | (ys - halo[1] < die[1] - 1e-9)
         | (ys + h + halo[3] > die[3] + 1e-9)] = True
    for rect, hl in obstacles:
        # room kept on each side of ``rect``: the larger of its halo and our facing one
        sep = np.zeros(4) if hl is None else np.maximum(halo[[2, 3, 0, 1]], hl)
        i0, i1, j0, j1 = lat.span(rect, sep, w, h)
        mask[i0:i1, j0:j1] = True
    return mask


def _wire_cost(design: Design, fp: Floorplan, plan: ArrayPlan, a: int, lat: _Lattice,
               px: np.ndarray, py: np.ndarray, live: np.ndarray):
    """ΔHPWL of array ``a`` (its current shape) at every lattice corner, and its pins with
    their offsets."""
    pins, ox, oy = _member_offsets(design, fp, plan, a)
    deg = np.diff(design.net_start)
    pin_net = design.pin_net[pins]
    nets = np.unique(pin_net)
    nets = nets[deg[nets] <= MAX_NET_PINS]
    cost = np.zeros((len(lat.xs), len(lat.ys)))
    if not len(nets):
        return cost, pins, ox, oy
    counts = deg[nets]
    first = np.cumsum(counts) - counts
    allp = np.repeat(design.net_start[nets] - first, counts) + np.arange(int(counts.sum()))
    seg = np.repeat(np.arange(len(nets)), counts)
    own = np.zeros(design.num_pins, bool)
    own[pins] = True
    oth = live[allp] & ~own[allp]

    def seg_range(vals, idx, n):
        lo, hi = np.full(n, np.inf), np.full(n, -np.inf)
        np.minimum.at(lo, idx, vals)
        np.maximum.at(hi, idx, vals)
        return lo, hi

    lo_x, hi_x = seg_range(px[allp[oth]], seg[oth], len(nets))
    lo_y, hi_y = seg_range(py[allp[oth]], seg[oth], len(nets))
    kn = np.searchsorted(nets, pin_net)
    ok = (kn < len(nets)) & (nets[np.minimum(kn, len(nets) - 1)] == pin_net)
    omin_x, omax_x = seg_range(ox[ok], kn[ok], len(nets))
    omin_y, omax_y = seg_range(oy[ok], kn[ok], len(nets))
    wt = design.net_weight[nets]
    cost += _axis_cost(lat.xs, lo_x, hi_x, omin_x, omax_x, wt)[:, None]
    cost += _axis_cost(lat.ys, lo_y, hi_y, omin_y, omax_y, wt)[None, :]
    return cost, pins, ox, oy


def greedy_arrays(design: Design, fp: Floorplan, plan: ArrayPlan, *, displace: float,
                  order: np.ndarray | None = None, reshape: bool = True) -> Floorplan:
    """Place the arrays of ``plan`` one by one (see the module docstring), each in the shape of
    :func:`~floorwidget.placer.macro_arrays.shape_options` and at the corner that cost least.

    Parameters
    ----------
    design : Design
    fp : Floorplan
        The global placement: cells, clusters and terminals stay where it has them.
    plan : ArrayPlan
        The arrays (their rectangles, halos and members); reshaped in place.
    displace : float
        Wirelength (µm) charged per µm² of standard-cell area an array covers.
    order : int array, optional
        The order in which arrays are placed (default: largest first, then most pins).
    reshape : bool
        Try every shape option (else keep each array's shape).

    Returns
    -------
    Floorplan
        Of ``plan.design``: every array at a lattice corner on the placement grid, or, where
        no corner is free, where it was (the macro legaliser then finds it a spot).
    """
    sd, sfp = plan.design, plan.floorplan.copy()
    k = len(plan.members)
    lat = _Lattice(design, fp)
    px, py = pin_positions(design, fp)
    live = np.ones(design.num_pins, bool)
    mov_mac = (design.kind == MACRO) & (fp.status == MOVABLE)
    live[mov_mac[design.pin_block]] = False
    cx, cy = fp.centres()
    fixed = np.arange(k, sd.num_blocks)
    obstacles = [(r, sd.halo[j]) for j, r in zip(fixed, sfp.rects()[fixed])]
    obstacles += [(r, None) for r in sd.blockages]
    if order is None:
        npins = np.array([len(_member_offsets(design, fp, plan, a)[0]) for a in range(k)])
        order = np.lexsort((-npins, -(sd.width[:k] * sd.height[:k])))
    for a in order:
        a = int(a)
        shapes = [int(plan.cols[a])]
        if reshape:
            shapes = [c for _, c in shape_options(len(plan.members[a]))]
        best = None
        for cols in shapes:
            plan.reshape(a, cols, cx, cy)
            w, h = float(sd.width[a]), float(sd.height[a])
            mask = _mask(design, lat, w, h, sd.halo[a], obstacles)
            if mask.all():
                continue
            cost, pins, ox, oy = _wire_cost(design, fp, plan, a, lat, px, py, live)
            if displace > 0:
                kx = max(int(np.ceil(w / lat.step[0])), 1)
                ky = max(int(np.ceil(h / lat.step[1])), 1)
                cost += displace * _box_sums(lat.area, kx, ky)
            cost[mask] = np.inf
            i, j = np.unravel_index(int(np.argmin(cost)), cost.shape)
            if best is None or cost[i, j] < best[0]:
                best = (float(cost[i, j]), cols, int(i), int(j), pins, ox, oy)
        if best is None:
            continue
        _, cols, i, j, pins, ox, oy = best
        plan.reshape(a, cols, cx, cy)
        sfp.x[a], sfp.y[a] = lat.xs[i], lat.ys[j]
        rect = np.array([lat.xs[i], lat.ys[j], lat.xs[i] + sd.width[a],
                         lat.ys[j] + sd.height[a]])
        obstacles.append((rect, sd.halo[a]))
        # this array's pins now count for the arrays after it
        px[pins] = lat.xs[i] + ox
        py[pins] = lat.ys[j] + oy
        live[pins] = True
    return sfp
