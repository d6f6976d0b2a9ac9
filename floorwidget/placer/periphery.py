"""Macro arrangement after global placement: macros against the core boundary, pins toward the
logic, and channels between macros either closed or wide enough.

Common practice (no single source) puts hard macros against the core boundary, or stacked
against macros that are, in compact groups, with their pin side toward the logic they talk to,
and leaves the channels between facing macros either abutted (halos only) or wide enough to
route and power; the logic then forms one region.  Wirelength stays in charge: each macro keeps
the place along the boundary, and the order, that the global placement gave it.

* :func:`edge_of` — the core edge each macro is nearest to.
* :func:`push_to_edges` — targets on the assigned edges, the ordinary minimum-displacement
  legaliser from there, then compaction: macros, nearest first, slide toward their edge until
  they touch it or a macro (with the halo rule's separation).
* :func:`close_channels` — a gap between facing macros narrower than ``channel`` is closed (one
  of the pair slides to abut the other) or, where that is blocked, widened to ``channel``.
* :func:`fill_pockets` — macros slide into pockets of logic walled in by macros, so the logic
  stays one region where it can.
* :func:`orient_mask_inward` — the allowed orientations whose pin centroid does not point at the
  macro's nearest core edge.

The results are early-floorplanning estimates; sign-off belongs to the implementation flow.
"""

from __future__ import annotations

import numpy as np

from ..design import MACRO, Design, Floorplan, orient_offsets, orient_size
from ..metrics import channel_gaps
from .constraints import macro_keepouts
from .legalize import legalize_macros

__all__ = ["edge_of", "push_to_edges", "close_channels", "orient_mask_inward", "compact",
           "fill_pockets"]

LEFT, BOTTOM, RIGHT, TOP = 0, 1, 2, 3
EPS = 1e-9


def edge_of(design: Design, fp: Floorplan, idx: np.ndarray) -> np.ndarray:
    """The core edge (LEFT, BOTTOM, RIGHT, TOP) nearest to each macro's footprint."""
    c = design.core
    r = fp.rects()[idx]
    d = np.stack([r[:, 0] - c[0], r[:, 1] - c[1], c[2] - r[:, 2], c[3] - r[:, 3]], axis=1)
    return np.argmin(d, axis=1)


def _sep(design: Design, i, j, axis: int) -> np.ndarray:
    """Least footprint distance between macro ``i`` and macros ``j`` along ``axis`` (0: i to
    the right of j, i.e. i's left halo against j's right; the others likewise): the larger
    of the two facing halos (the halo rule)."""
    h = design.halo
    if axis == LEFT:       # i moves left, j on its left
        return np.maximum(h[i, 0], h[j, 2])
    if axis == RIGHT:
        return np.maximum(h[i, 2], h[j, 0])
    if axis == BOTTOM:
        return np.maximum(h[i, 1], h[j, 3])
    return np.maximum(h[i, 3], h[j, 1])


def _travel(design: Design, rects: np.ndarray, i: int, others: np.ndarray, direction: int,
            bounds: np.ndarray) -> float:
    """How far macro ``i`` may slide in ``direction`` before it meets the core edge (its
    footprint), a blockage or another macro (``others``, with the halo rule's separation)."""
    r = rects[i]
    c, d, hl = design.core, design.die, design.halo[i]
    # the footprint stays in the core, the halo in the die
    if direction == LEFT:
        room = min(r[0] - c[0], r[0] - hl[0] - d[0])
    elif direction == RIGHT:
        room = min(c[2] - r[2], d[2] - r[2] - hl[2])
    elif direction == BOTTOM:
        room = min(r[1] - c[1], r[1] - hl[1] - d[1])
    else:
        room = min(c[3] - r[3], d[3] - r[3] - hl[3])
    o = rects[others]
    sep = _sep(design, i, others, direction)
    # across the motion: the two can meet unless they are apart by the halo rule there too
    if direction in (LEFT, RIGHT):
        above = o[:, 1] >= r[3]
        cross = np.where(above, _sep(design, i, others, TOP), _sep(design, i, others, BOTTOM))
    else:
        right = o[:, 0] >= r[2]
        cross = np.where(right, _sep(design, i, others, RIGHT), _sep(design, i, others, LEFT))
    if len(bounds):
        o = np.concatenate([o, bounds])
        sep = np.concatenate([sep, np.zeros(len(bounds))])
        cross = np.concatenate([cross, np.zeros(len(bounds))])
    if not len(o):
        return max(room, 0.0)
    if direction in (LEFT, RIGHT):
        lat = np.maximum(o[:, 1] - r[3], r[1] - o[:, 3]) < cross - EPS
        gap = (r[0] - o[:, 2]) if direction == LEFT else (o[:, 0] - r[2])
    else:
        lat = np.maximum(o[:, 0] - r[2], r[0] - o[:, 2]) < cross - EPS
        gap = (r[1] - o[:, 3]) if direction == BOTTOM else (o[:, 1] - r[3])
    ahead = lat & (gap > -EPS)
    if ahead.any():
        room = min(room, float(np.min(gap[ahead] - sep[ahead])))
    return max(room, 0.0)


def _slide(design: Design, fp: Floorplan, i: int, direction: int, dist: float) -> bool:
    """Move macro ``i`` by ``dist`` (at most) in ``direction``, rounded to the grid so it stays
    legal; returns whether it moved."""
    ax = 0 if direction in (LEFT, RIGHT) else 1
    g0, gp = design.grid_origin[ax], design.grid_pitch[ax]
    pos = fp.x if ax == 0 else fp.y
    k = np.floor(dist / gp + 1e-9)
    if k <= 0:
        return False
    step = k * gp * (-1 if direction in (LEFT, BOTTOM) else 1)
    new = g0 + np.round((pos[i] + step - g0) / gp) * gp
    if new == pos[i]:
        return False
    pos[i] = new
    return True


def _obstacles(design: Design) -> np.ndarray:
    return macro_keepouts(design)


def compact(design: Design, fp: Floorplan, idx: np.ndarray, edge: np.ndarray,
            rounds: int = 4) -> Floorplan:
    """Slide every macro of ``idx`` toward its ``edge``, nearest first, as far as it goes."""
    out = fp.copy()
    mac = np.flatnonzero(design.kind == MACRO)
    bl = _obstacles(design)
    for _ in range(rounds):
        moved = False
        r = out.rects()
        c = design.core
        dist = np.choose(edge, [r[idx, 0] - c[0], r[idx, 1] - c[1], c[2] - r[idx, 2],
                                c[3] - r[idx, 3]])
        for k in np.argsort(dist, kind="stable"):
            i = idx[k]
            r = out.rects()
            others = mac[mac != i]
            t = _travel(design, r, i, others, int(edge[k]), bl)
            moved |= _slide(design, out, i, int(edge[k]), t)
        if not moved:
            break
    return out


def push_to_edges(design: Design, fp: Floorplan, idx: np.ndarray) -> tuple[Floorplan,
                                                                           np.ndarray]:
    """Macros ``idx`` (movable) against the core boundary, stacked where an edge is full.

    Each macro goes to the edge nearest its global-placement footprint, keeping its position
    along that edge; the minimum-displacement legaliser resolves the overlaps from there (a
    macro that finds its spot taken moves along the edge or inward next to it), and a
    compaction slides every macro, nearest first, toward its edge until it touches the edge
    or a macro (touching macros form the stacks).  Returns the floorplan and the edges.
    """
    out = fp.copy()
    edge = edge_of(design, out, idx)
    c = design.core
    w, h = out.sizes()
    x = out.x[idx]
    y = out.y[idx]
    out.x[idx] = np.where(edge == LEFT, c[0], np.where(edge == RIGHT, c[2] - w[idx], x))
    out.y[idx] = np.where(edge == BOTTOM, c[1], np.where(edge == TOP, c[3] - h[idx], y))
    g0, gp = design.grid_origin, design.grid_pitch
    out.x[idx] = np.clip(g0[0] + np.round((out.x[idx] - g0[0]) / gp[0]) * gp[0],
                         g0[0] + np.ceil((c[0] - g0[0]) / gp[0] - 1e-9) * gp[0],
                         g0[0] + np.floor((c[2] - w[idx] - g0[0]) / gp[0] + 1e-9) * gp[0])
    out.y[idx] = np.clip(g0[1] + np.round((out.y[idx] - g0[1]) / gp[1]) * gp[1],
                         g0[1] + np.ceil((c[1] - g0[1]) / gp[1] - 1e-9) * gp[1],
                         g0[1] + np.floor((c[3] - h[idx] - g0[1]) / gp[1] + 1e-9) * gp[1])
    out = legalize_macros(design, out, macros=idx)
    out = compact(design, out, idx, edge)
    return out, edge


def close_channels(design: Design, fp: Floorplan, movable: np.ndarray, channel: float,
                   rounds: int = 6) -> Floorplan:
    """Remove channels narrower than ``channel`` between facing macros (the rule of
    :func:`floorwidget.metrics.channel_gaps`: open wider than the two facing halos together,
    narrower than ``channel``).

    For each such pair with a movable member, that member slides toward the other until the
    pair abuts (the halo rule's least separation), or, when something is in the way, away from
    it until the gap is ``channel``; pairs that can do neither are left (the report counts
    them).
    """
    out = fp.copy()
    if channel <= 0:
        return out
    mac = np.flatnonzero(design.kind == MACRO)
    mov = np.zeros(design.num_blocks, bool)
    mov[movable] = True
    bl = _obstacles(design)
    for _ in range(rounds):
        ch = channel_gaps(design, out, channel)
        todo = mov[ch.pairs[:, 0]] | mov[ch.pairs[:, 1]]
        if not todo.any():
            break
        changed = False
        for k in np.flatnonzero(todo):
            r = out.rects()
            p, q = int(ch.pairs[k, 0]), int(ch.pairs[k, 1])
            ax = 0 if ch.vertical[k] else 1  # 0: side by side, the gap is horizontal
            i, j = (p, q) if r[p, ax] < r[q, ax] else (q, p)  # i left of (or below) j
            g = (r[j, 0] - r[i, 2]) if ax == 0 else (r[j, 1] - r[i, 3])
            sep = float(_sep(design, np.array([j]), np.array([i]), LEFT if ax == 0
                             else BOTTOM)[0])
            if not (sep + 1e-6 < g < channel - 1e-6):
                continue
            toward_j = RIGHT if ax == 0 else TOP
            toward_i = LEFT if ax == 0 else BOTTOM
            # close first (either movable member slides toward the other), else widen (one
            # slides away until the gap is the channel)
            moves = [(m, d_) for m, d_ in ((j, toward_i), (i, toward_j)) if mov[m]]
            moves += [(m, d_) for m, d_ in ((j, toward_j), (i, toward_i)) if mov[m]]
            gp = design.grid_pitch[ax]
            for k_, (m, direction) in enumerate(moves):
                closing = k_ < len(moves) // 2
                want = g - sep if closing else np.ceil((channel - g) / gp - 1e-9) * gp
                t = _travel(design, r, m, mac[mac != m], direction, bl)
                if t >= want - 1e-6 and _slide(design, out, m, direction, want):
                    changed = True
                    break
        if not changed:
            break
    return out


def orient_mask_inward(design: Design, fp: Floorplan, idx: np.ndarray,
                       edge: np.ndarray | None = None) -> np.ndarray:
    """Per macro of ``idx``, the 8-bit mask of its allowed orientations whose pin centroid does
    not point at its nearest core edge (``edge`` when given); all allowed ones when none
    qualifies (e.g. pins at the centre).

    A centroid offset ``(px, py)`` from the centre, in an orientation with footprint
    ``w × h``, points at the edge whose normalised component (``-px / (w/2)`` for LEFT,
    ``px / (w/2)`` for RIGHT, likewise with ``py`` and ``h``) is positive and the largest.
    """
    if edge is None:
        edge = edge_of(design, fp, idx)
    allowed = design.orient_allowed[idx].astype(np.int64)
    d = design
    pb = d.pin_block
    sel = np.isin(pb, idx)
    k = np.searchsorted(idx, pb[sel]) if np.all(np.diff(idx) > 0) else \
        np.argsort(idx)[np.searchsorted(np.sort(idx), pb[sel])]
    cnt = np.bincount(k, minlength=len(idx)).astype(float)
    mx = np.bincount(k, weights=d.pin_dx[sel], minlength=len(idx))
    my = np.bincount(k, weights=d.pin_dy[sel], minlength=len(idx))
    has = cnt > 0
    mx = np.where(has, mx / np.maximum(cnt, 1), 0.0)
    my = np.where(has, my / np.maximum(cnt, 1), 0.0)
    mask = np.zeros(len(idx), np.int64)
    for o in range(8):
        px, py = orient_offsets(mx, my, np.full(len(idx), o))
        w, h = orient_size(d.width[idx], d.height[idx], np.full(len(idx), o))
        comp = np.stack([-px / (w / 2), -py / (h / 2), px / (w / 2), py / (h / 2)], axis=1)
        toward = (np.argmax(comp, axis=1) == edge) & (comp.max(axis=1) > 1e-9)
        mask |= np.where(~toward, 1 << o, 0)
    mask &= allowed
    return np.where((mask == 0) | ~has, allowed, mask)



def _on_boundary(design: Design, r: np.ndarray, hl: np.ndarray) -> np.ndarray:
    """Per macro, the sides (LEFT, BOTTOM, RIGHT, TOP) on which it sits against the boundary:
    its footprint within a grid step of the core edge or its halo within one of the die edge."""
    c, d = design.core, design.die
    gx, gy = design.grid_pitch
    return np.stack([
        (r[:, 0] - c[0] < gx) | (r[:, 0] - hl[:, 0] - d[0] < gx),
        (r[:, 1] - c[1] < gy) | (r[:, 1] - hl[:, 1] - d[1] < gy),
        (c[2] - r[:, 2] < gx) | (d[2] - r[:, 2] - hl[:, 2] < gx),
        (c[3] - r[:, 3] < gy) | (d[3] - r[:, 3] - hl[:, 3] < gy)], axis=1)


def fill_pockets(design: Design, fp: Floorplan, movable: np.ndarray, rounds: int = 8
                 ) -> Floorplan:
    """Close pockets of logic walled in by macros (pieces of the free core other than the
    largest, :func:`floorwidget.metrics.logic_regions`): a macro that sits on the boundary and
    borders a pocket slides along the boundary into it, when that lowers the number of pieces
    (or their area) and nothing is in the way."""
    from ..metrics import logic_regions

    out = fp.copy()
    mov = np.zeros(design.num_blocks, bool)
    mov[movable] = True
    mac = np.flatnonzero(design.kind == MACRO)
    bl = _obstacles(design)

    def score(f):
        lr = logic_regions(design, f)
        return lr, (lr.count, float(lr.areas[1:].sum()) if len(lr.areas) > 1 else 0.0)

    lr, best = score(out)
    for _ in range(rounds):
        if best[0] <= 1 and best[1] == 0.0:
            break
        improved = False
        for k in range(2, len(lr.areas) + 1):
            cols, rows = np.nonzero(lr.labels == k)
            if not len(cols):
                continue
            px0, px1 = lr.x_edges[cols.min()], lr.x_edges[cols.max() + 1]
            py0, py1 = lr.y_edges[rows.min()], lr.y_edges[rows.max() + 1]
            r = out.rects()
            rh = out.rects(halo=True)
            near = mov[mac] & (rh[mac, 0] <= px1 + 1e-6) & (rh[mac, 2] >= px0 - 1e-6) & \
                (rh[mac, 1] <= py1 + 1e-6) & (rh[mac, 3] >= py0 - 1e-6)
            side = _on_boundary(design, r[mac], design.halo[mac])
            for i in mac[near]:
                s = side[np.searchsorted(mac, i)]
                # along the boundary only: up/down on a left or right edge, sideways on the
                # bottom or top one; toward the pocket
                toward = [d_ for d_, ok in ((TOP, py1 > r[i, 3]), (BOTTOM, py0 < r[i, 1]),
                                            (RIGHT, px1 > r[i, 2]), (LEFT, px0 < r[i, 0]))
                          if ok]
                if s.any():  # keep to the boundary it sits on
                    dirs = [d_ for d_ in toward if (d_ in (TOP, BOTTOM) and (s[LEFT] or s[RIGHT]))
                            or (d_ in (LEFT, RIGHT) and (s[BOTTOM] or s[TOP]))]
                else:  # a stacked macro: any way toward the pocket, if it still touches
                    dirs = toward
                for direction in dirs:
                    want = {LEFT: r[i, 0] - px0, RIGHT: px1 - r[i, 2], BOTTOM: r[i, 1] - py0,
                            TOP: py1 - r[i, 3]}[direction]
                    t = min(_travel(design, r, i, mac[mac != i], direction, bl), want)
                    trial = out.copy()
                    if t <= 0 or not _slide(design, trial, i, direction, t):
                        continue
                    if not s.any():
                        rt = trial.rects()
                        if min(_travel(design, rt, i, mac[mac != i], e, bl)
                               for e in range(4)) > max(design.grid_pitch):
                            continue  # it would float free of its stack
                    lr2, sc = score(trial)
                    if sc < best:
                        out, lr, best, improved = trial, lr2, sc, True
                        break
                if improved:
                    break
            if improved:
                break
        if not improved:
            break
    return out
