"""Macro orientation: the eight LEF/DEF orientations as a group, and wirelength-driven choice.

The orientation codes are those of :data:`floorwidget.design.ORIENTATIONS`; their transforms
are owned by :func:`floorwidget.design.orient_offsets` / :func:`~floorwidget.design.orient_size`
and follow the LEF/DEF language reference (N = R0, W = R90 counter-clockwise, S = R180,
E = R270, FN = MY, FS = MX, FW = MX90, FE = MY90).  The eight form the dihedral group D4:
:func:`rotated` composes a placed orientation with a further 90° counter-clockwise rotation,
:func:`flipped` with a mirror about the vertical axis.  Both tables are derived here from
``orient_offsets`` itself, so they can never disagree with the geometry.

:func:`choose_orientations` picks, for every movable macro, the allowed orientation that
minimises the (weighted) HPWL of its nets with everything else where it is, keeping the
footprint centre.  All macros and all eight orientations are evaluated at once with the
"exclusive bounding box" of each net (the box of its pins without the macro's own, from the
two smallest / largest per-block extremes), then a maximal independent set of improving macros
(no two share a net; greedy by gain, built in the parallel rounds of Luby, SIAM J. Comput.
15(4), 1986) is applied, so each pass lowers the total exactly by the sum of the accepted
gains, and passes repeat until no single macro gains.  Trying every allowed orientation of
each macro against its nets is common practice in mixed-size placement flows; the vectorised
exclusive-box evaluation and the independent-set update are how it is done here.
"""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np

from ..design import ALL_ORIENTS, Design, Floorplan, orient_offsets, orient_size
from ._select import movable_macros

__all__ = ["choose_orientations", "flipped", "rotated", "orient_matrix"]


def _matrices() -> np.ndarray:
    codes = np.arange(8)
    ax, ay = orient_offsets(np.ones(8), np.zeros(8), codes)  # image of the x unit vector
    bx, by = orient_offsets(np.zeros(8), np.ones(8), codes)  # image of the y unit vector
    return np.stack([np.stack([ax, bx], -1), np.stack([ay, by], -1)], -2)  # (8, 2, 2)


_MATS = _matrices()


def _code_of(mat: np.ndarray) -> int:
    hit = np.flatnonzero(np.all(np.abs(_MATS - mat) < 1e-12, axis=(1, 2)))
    return int(hit[0])


_R90 = _MATS[3]  # W: counter-clockwise quarter turn
_MY = _MATS[4]  # FN: mirror about the vertical (y) axis
_ROT = np.array([_code_of(_R90 @ _MATS[c]) for c in range(8)], dtype=np.int8)
_FLIP = np.array([_code_of(_MY @ _MATS[c]) for c in range(8)], dtype=np.int8)


def orient_matrix(code: int) -> np.ndarray:
    """The 2x2 matrix of orientation ``code`` acting on N-orientation centre offsets."""
    return _MATS[int(code)].copy()


def rotated(code: int, allowed: int = ALL_ORIENTS) -> int:
    """Orientation after a further 90° counter-clockwise turn, skipping disallowed ones.

    ``rotated`` follows the cycles N -> W -> S -> E -> N and FN -> FE -> FS -> FW -> FN;
    when the next one is not in the bitmask ``allowed`` the turn continues (a half turn, then
    three quarters); when none is allowed the code is returned unchanged.

    Examples
    --------
    >>> from floorwidget.design import ORIENT_CODE, ORIENTATIONS
    >>> ORIENTATIONS[rotated(ORIENT_CODE["N"])]
    'W'
    >>> ORIENTATIONS[rotated(ORIENT_CODE["N"], allowed=0b11)]   # only N and S allowed
    'S'
    """
    c = int(code)
    for _ in range(3):
        c = int(_ROT[c])
        if allowed >> c & 1:
            return c
    return int(code)


def flipped(code: int, allowed: int = ALL_ORIENTS) -> int:
    """Orientation after a mirror about the vertical axis (N <-> FN, S <-> FS, W <-> FW,
    E <-> FE); unchanged when the mirror image is not in the bitmask ``allowed``.

    Examples
    --------
    >>> from floorwidget.design import ORIENT_CODE, ORIENTATIONS
    >>> ORIENTATIONS[flipped(ORIENT_CODE["W"])]
    'FW'
    """
    f = int(_FLIP[int(code)])
    return f if allowed >> f & 1 else int(code)


# ---------------------------------------------------------------------------------------------




def _exclusive(vals: np.ndarray, nstart: np.ndarray, gnet: np.ndarray, big: bool) -> np.ndarray:
    """Per group: the min (``big`` False) or max over the *other* groups of its net."""
    v = -vals if big else vals
    m1 = np.minimum.reduceat(v, nstart)
    eq = np.flatnonzero(v == m1[gnet])
    _, first = np.unique(gnet[eq], return_index=True)
    arg = eq[first]  # per net, the first group attaining the minimum
    masked = v.copy()
    masked[arg] = np.inf
    m2 = np.minimum.reduceat(masked, nstart)
    is_arg = np.zeros(len(v), bool)
    is_arg[arg] = True
    out = np.where(is_arg, m2[gnet], m1[gnet])
    return -out if big else out


def _evaluate(design: Design, fp: Floorplan, cand: np.ndarray, allowed: np.ndarray,
              weighted: bool):
    """Cost ``(nc, 8)`` of every candidate macro in every orientation (inf where not allowed)
    and the per-group data needed for the independence test."""
    n = design.num_blocks
    ci = np.full(n, -1, np.intp)
    cidx = np.flatnonzero(cand)
    ci[cidx] = np.arange(len(cidx))
    nets = design.nets_of(cidx)
    starts = design.net_start[nets]
    lens = design.net_start[nets + 1] - starts
    if not len(nets) or lens.sum() == 0:
        return None
    # pins of those nets, net-local index
    pnet = np.repeat(np.arange(len(nets)), lens)
    pins = np.repeat(starts - np.concatenate([[0], np.cumsum(lens)[:-1]]), lens) \
        + np.arange(lens.sum())
    b = design.pin_block[pins]
    cx, cy = fp.centres()
    ox, oy = orient_offsets(design.pin_dx[pins], design.pin_dy[pins], fp.orient[b])
    px, py = cx[b] + ox, cy[b] + oy
    isc = cand[b]
    gblk = np.where(isc, b, n)
    key = pnet.astype(np.int64) * (n + 1) + gblk
    order = np.argsort(key, kind="stable")
    key, pins, b, px, py, isc, pnet = (a[order] for a in (key, pins, b, px, py, isc, pnet))
    gstart = np.flatnonzero(np.r_[True, key[1:] != key[:-1]])
    gnet = pnet[gstart]
    gcand = isc[gstart]
    gb = b[gstart]
    ex = [_exclusive(np.minimum.reduceat(px, gstart), _seg(gnet), gnet, False),
          _exclusive(np.maximum.reduceat(px, gstart), _seg(gnet), gnet, True),
          _exclusive(np.minimum.reduceat(py, gstart), _seg(gnet), gnet, False),
          _exclusive(np.maximum.reduceat(py, gstart), _seg(gnet), gnet, True)]
    # candidate groups: their pins in all eight orientations around the fixed centre
    cg = np.flatnonzero(gcand)
    cpin = np.flatnonzero(isc)
    cb = b[cpin]
    codes = np.arange(8)
    dx = design.pin_dx[pins[cpin]][:, None]
    dy = design.pin_dy[pins[cpin]][:, None]
    ox8, oy8 = orient_offsets(dx, dy, codes[None, :])
    qx = cx[cb][:, None] + ox8
    qy = cy[cb][:, None] + oy8
    # group boundaries within the candidate pins (groups are contiguous in the sorted order)
    cstart = np.searchsorted(cpin, gstart[cg])
    lo_x = np.minimum(np.minimum.reduceat(qx, cstart, axis=0), ex[0][cg][:, None])
    hi_x = np.maximum(np.maximum.reduceat(qx, cstart, axis=0), ex[1][cg][:, None])
    lo_y = np.minimum(np.minimum.reduceat(qy, cstart, axis=0), ex[2][cg][:, None])
    hi_y = np.maximum(np.maximum.reduceat(qy, cstart, axis=0), ex[3][cg][:, None])
    wgt = design.net_weight[nets[gnet[cg]]] if weighted else np.ones(len(cg))
    gcost = wgt[:, None] * ((hi_x - lo_x) + (hi_y - lo_y))
    cost = np.zeros((len(cidx), 8))
    np.add.at(cost, ci[gb[cg]], gcost)
    cost[~allowed] = np.inf
    return cost, cidx, ci, gnet, gb, gcand


def _seg(gnet: np.ndarray) -> np.ndarray:
    return np.flatnonzero(np.r_[True, gnet[1:] != gnet[:-1]])


def choose_orientations(design: Design, fp: Floorplan, macros: Iterable | None = None, *,
                        passes: int = 50, swap: bool = True, weighted: bool = True,
                        restrict: np.ndarray | None = None) -> Floorplan:
    """Choose each movable macro's orientation to minimise the HPWL of its nets.

    Parameters
    ----------
    design : Design
    fp : Floorplan
        Current placement; never modified.
    macros : names, indices or mask, optional
        Only these (movable macros among them) may change; default all movable macros.
    passes : int
        Maximum number of evaluate-and-apply rounds; it stops as soon as no macro improves
        (a local optimum: no single macro gains by changing its orientation alone).
    swap : bool
        Allow orientations that swap width and height (E, W, FE, FW of a non-square macro);
        set False after legalisation to keep every footprint where it is.
    weighted : bool
        Use the nets' weights (the placer's objective) rather than plain HPWL.
    restrict : (n,) uint8 array, optional
        Per block, a mask of orientations to choose among (ANDed with the allowed ones; a
        macro left with none keeps all its allowed ones), e.g. those whose pins face the
        logic (:func:`floorwidget.placer.periphery.orient_mask_inward`).

    Returns
    -------
    Floorplan
        A copy with new ``orient`` (and ``x``, ``y`` so that each footprint centre stays put)
        for the macros whose orientation changed (a change that keeps the footprint keeps
        ``x``, ``y`` bit-exact); ``info`` gains ``orient_changed``,
        ``orient_passes`` and ``orient_gain`` (the drop in (weighted) HPWL, µm).  A width/height
        swap can leave a macro overlapping or off the grid: legalise afterwards.

    Examples
    --------
    >>> import floorwidget as fw                                        # doctest: +SKIP
    >>> d = fw.load("demo_data/heron_dsp.json")                         # doctest: +SKIP
    >>> fp = choose_orientations(d, d.initial)                          # doctest: +SKIP

    References
    ----------
    M. Luby, "A simple parallel algorithm for the maximal independent set problem",
    SIAM J. Comput. 15(4), 1986.
    """
    out = fp.copy()
    cand = movable_macros(design, fp, macros)
    info = {"orient_changed": 0, "orient_passes": 0, "orient_gain": 0.0}
    if cand.any():
        cidx = np.flatnonzero(cand)
        bits = design.orient_allowed[cidx].astype(np.int64)
        if restrict is not None:
            sub = bits & np.asarray(restrict, np.int64)[cidx]
            bits = np.where(sub != 0, sub, bits)
        allowed = (bits[:, None] >> np.arange(8)[None, :]) & 1 == 1
        if not swap:
            w0, h0 = orient_size(design.width[cidx], design.height[cidx], out.orient[cidx])
            w8, h8 = orient_size(design.width[cidx][:, None], design.height[cidx][:, None],
                                 np.arange(8)[None, :])
            allowed &= (w8 == w0[:, None]) & (h8 == h0[:, None])
        changed = np.zeros(design.num_blocks, bool)
        for _ in range(passes):
            ev = _evaluate(design, out, cand, allowed, weighted)
            if ev is None:
                break
            info["orient_passes"] += 1
            cost, cidx, ci, gnet, gb, gcand = ev
            cur = cost[np.arange(len(cidx)), out.orient[cidx]]
            best = np.argmin(cost, axis=1)
            bval = cost[np.arange(len(cidx)), best]
            # a macro in a disallowed orientation must change (infinite gain) when it can
            with np.errstate(invalid="ignore"):
                gain = np.where(np.isfinite(bval), cur - bval, 0.0)
            improve = gain > 1e-9 * np.maximum(1.0, np.where(np.isfinite(cur), np.abs(cur), 0))
            if not improve.any():
                break
            # independent set (no two share a net), greedy by gain in Luby-style rounds: a
            # macro is taken when it has the best gain on each of its nets among those still
            # available; the nets of the taken ones then block their neighbours
            nc = len(cidx)
            order = np.lexsort((np.arange(nc), -gain))
            rank0 = np.empty(nc)
            rank0[order] = np.arange(nc)
            seg = _seg(gnet)
            seg_of = np.cumsum(np.r_[True, gnet[1:] != gnet[:-1]]) - 1
            gc = np.flatnonzero(gcand)
            gci = ci[gb[gc]]
            avail = improve.copy()
            accept = np.zeros(nc, bool)
            used = np.zeros(len(seg), bool)
            while avail.any():
                grank = np.full(len(gnet), np.inf)
                grank[gc] = np.where(avail[gci], rank0[gci], np.inf)
                netmin = np.minimum.reduceat(grank, seg)[seg_of]
                clash = np.isfinite(grank[gc]) & (grank[gc] != netmin[gc])
                new = avail & (np.bincount(gci[clash], minlength=nc) == 0)
                accept |= new
                used[seg_of[gc[new[gci]]]] = True
                blocked = np.bincount(gci[used[seg_of[gc]]], minlength=nc) > 0
                avail &= ~blocked & ~accept
            blocks = cidx[accept]
            cx, cy = out.centres()
            new = best[accept].astype(np.int8)
            w0, h0 = orient_size(design.width[blocks], design.height[blocks], out.orient[blocks])
            w, h = orient_size(design.width[blocks], design.height[blocks], new)
            same = (w == w0) & (h == h0)  # same footprint: keep x, y bit-exact
            out.orient[blocks] = new
            out.x[blocks] = np.where(same, out.x[blocks], cx[blocks] - w / 2)
            out.y[blocks] = np.where(same, out.y[blocks], cy[blocks] - h / 2)
            changed[blocks] = True
            ga = gain[accept]
            info["orient_gain"] += float(ga[np.isfinite(ga)].sum())
        back = changed & (out.orient == fp.orient)  # came back to where it started: bit-exact
        out.x[back], out.y[back] = fp.x[back], fp.y[back]
        info["orient_changed"] = int((out.orient != fp.orient).sum())
    out.info.update(info)
    return out
