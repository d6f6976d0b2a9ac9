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
from .macro_arrays import ArrayPlan

__all__ = ["MAX_NET_PINS", "greedy_arrays"]

MAX_NET_PINS = 1000  # nets with more pins are left out of the wirelength term
LATTICE = 160        # candidate corners along the longer core side (at least the grid pitch)


def _member_offsets(design: Design, fp: Floorplan, plan: ArrayPlan, a: int):
    """Pins of array ``a``: their block, net and offset from the array's lower-left corner."""
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


def greedy_arrays(design: Design, fp: Floorplan, plan: ArrayPlan, *, displace: float,
                  order: np.ndarray | None = None) -> Floorplan:
    """Place the arrays of ``plan`` one by one (:mod:`module docstring <.macro_greedy>`).

    Parameters
    ----------
    design : Design
    fp : Floorplan
        The global placement: cells, clusters and terminals stay where it has them.
    plan : ArrayPlan
        The arrays (their rectangles, halos and members).
    displace : float
        Wirelength (µm) charged per µm² of standard-cell area an array covers.
    order : int array, optional
        The order in which arrays are placed (default: largest first, then most pins).

    Returns
    -------
    Floorplan
        Of ``plan.design``: every array at a lattice corner on the placement grid, or, where
        no corner is free, where it was (the macro legaliser then finds it a spot).
    """
    sd, sfp = plan.design, plan.floorplan.copy()
    k = len(plan.members)
    c, die = design.core, design.die
    gx, gy = design.grid_pitch
    g0 = design.grid_origin
    side = max(c[2] - c[0], c[3] - c[1]) / LATTICE
    step = np.array([max(np.ceil(side / gx), 1) * gx, max(np.ceil(side / gy), 1) * gy])
    x0 = g0[0] + np.ceil((c[0] - g0[0]) / gx - 1e-9) * gx
    y0 = g0[1] + np.ceil((c[1] - g0[1]) / gy - 1e-9) * gy
    xs = x0 + step[0] * np.arange(int((c[2] - x0) // step[0]) + 1)
    ys = y0 + step[1] * np.arange(int((c[3] - y0) // step[1]) + 1)
    # standard-cell and cluster area per lattice cell (the cost of covering logic)
    soft = ((design.kind == CELL) | (design.kind == CLUSTER)) & (fp.status == MOVABLE)
    w, h = fp.sizes()
    cx, cy = fp.centres()
    ix = np.clip(((cx[soft] - x0) // step[0]).astype(np.intp), 0, len(xs) - 1)
    iy = np.clip(((cy[soft] - y0) // step[1]).astype(np.intp), 0, len(ys) - 1)
    area = np.zeros((len(xs), len(ys)))
    np.add.at(area, (ix, iy), w[soft] * h[soft])
    # pins: positions now; those of movable macros count once their array is placed
    px, py = pin_positions(design, fp)
    live = np.ones(design.num_pins, bool)
    mov_mac = (design.kind == MACRO) & (fp.status == MOVABLE)
    live[mov_mac[design.pin_block]] = False
    deg = np.diff(design.net_start)
    pin_net = design.pin_net
    # obstacles for the mask: fixed arrays (the plan's FIXED blocks) and keep-outs
    blocked = np.zeros((len(xs), len(ys)), bool)
    aw, ah = sd.width[:k], sd.height[:k]
    ahl = sd.halo[:k]

    def block(rect: np.ndarray, sep: np.ndarray, a: int) -> np.ndarray:
        """Lattice corners where array ``a`` would come within ``sep`` (l, b, r, t) of
        ``rect``."""
        lo_x = rect[0] - sep[2] - aw[a]
        hi_x = rect[2] + sep[0]
        lo_y = rect[1] - sep[3] - ah[a]
        hi_y = rect[3] + sep[1]
        i0, i1 = np.searchsorted(xs, lo_x, "right"), np.searchsorted(xs, hi_x, "left")
        j0, j1 = np.searchsorted(ys, lo_y, "right"), np.searchsorted(ys, hi_y, "left")
        return np.array([i0, i1, j0, j1])

    fixed = np.arange(k, sd.num_blocks)
    frects = sfp.rects()[fixed]
    keep = sd.blockages
    if order is None:
        npins = np.array([len(_member_offsets(design, fp, plan, a)[0]) for a in range(k)])
        order = np.lexsort((-npins, -(aw * ah)))
    placed_rects: list[tuple[np.ndarray, np.ndarray]] = []
    for a in order:
        a = int(a)
        mask = blocked.copy()
        # footprint in the core, halo in the die
        mask[xs + aw[a] > c[2] + 1e-9, :] = True
        mask[:, ys + ah[a] > c[3] + 1e-9] = True
        mask[xs - ahl[a, 0] < die[0] - 1e-9, :] = True
        mask[xs + aw[a] + ahl[a, 2] > die[2] + 1e-9, :] = True
        mask[:, ys - ahl[a, 1] < die[1] - 1e-9] = True
        mask[:, ys + ah[a] + ahl[a, 3] > die[3] + 1e-9] = True
        for j, r in zip(fixed, frects):
            hl = sd.halo[j]
            sep = np.maximum(ahl[a], hl[[2, 3, 0, 1]])
            i0, i1, j0, j1 = block(r, sep, a)
            mask[i0:i1, j0:j1] = True
        for r in keep:
            i0, i1, j0, j1 = block(r, np.zeros(4), a)
            mask[i0:i1, j0:j1] = True
        for r, hl in placed_rects:
            sep = np.maximum(ahl[a], hl[[2, 3, 0, 1]])
            i0, i1, j0, j1 = block(r, sep, a)
            mask[i0:i1, j0:j1] = True
        if mask.all():
            continue
        pins, ox, oy = _member_offsets(design, fp, plan, a)
        nets = np.unique(pin_net[pins])
        nets = nets[deg[nets] <= MAX_NET_PINS]
        cost = np.zeros((len(xs), len(ys)))
        if len(nets):
            # the other live pins of these nets, and this array's offsets per net
            starts, counts = design.net_start[nets], deg[nets]
            allp = np.repeat(starts - np.cumsum(np.r_[0, counts[:-1]]), counts) + \
                np.arange(counts.sum())
            seg = np.repeat(np.arange(len(nets)), counts)
            own = np.zeros(design.num_pins, bool)
            own[pins] = True
            oth = live[allp] & ~own[allp]
            big = np.inf
            lo_x = np.full(len(nets), big)
            hi_x = np.full(len(nets), -big)
            lo_y, hi_y = lo_x.copy(), hi_x.copy()
            np.minimum.at(lo_x, seg[oth], px[allp[oth]])
            np.maximum.at(hi_x, seg[oth], px[allp[oth]])
            np.minimum.at(lo_y, seg[oth], py[allp[oth]])
            np.maximum.at(hi_y, seg[oth], py[allp[oth]])
            k_net = np.searchsorted(nets, pin_net[pins])
            ok = (k_net < len(nets)) & (nets[np.minimum(k_net, len(nets) - 1)] == pin_net[pins])
            kn, oxs, oys = k_net[ok], ox[ok], oy[ok]
            omin_x = np.full(len(nets), big)
            omax_x = np.full(len(nets), -big)
            omin_y, omax_y = omin_x.copy(), omax_x.copy()
            np.minimum.at(omin_x, kn, oxs)
            np.maximum.at(omax_x, kn, oxs)
            np.minimum.at(omin_y, kn, oys)
            np.maximum.at(omax_y, kn, oys)
            wt = design.net_weight[nets]
            cost += _axis_cost(xs, lo_x, hi_x, omin_x, omax_x, wt)[:, None]
            cost += _axis_cost(ys, lo_y, hi_y, omin_y, omax_y, wt)[None, :]
        if displace > 0:
            kx = max(int(np.ceil(aw[a] / step[0])), 1)
            ky = max(int(np.ceil(ah[a] / step[1])), 1)
            cost += displace * _box_sums(area, kx, ky)
        cost[mask] = np.inf
        i, j = np.unravel_index(int(np.argmin(cost)), cost.shape)
        sfp.x[a], sfp.y[a] = xs[i], ys[j]
        r = np.array([xs[i], ys[j], xs[i] + aw[a], ys[j] + ah[a]])
        placed_rects.append((r, ahl[a]))
        # this array's pins now count for the arrays after it
        px[pins] = xs[i] + ox
        py[pins] = ys[j] + oy
        live[pins] = True
    return sfp
