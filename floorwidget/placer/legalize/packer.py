"""Step 6 of the legaliser: the complete fallback, fixed-outline packing by sequence pair
(Murata, Fujiyoshi, Nakatake, Kajitani, ICCAD 1995; annealing after Adya, Markov, IEEE TVLSI
2003; LCS evaluation after Tang, Tian, Wong, DATE 2000), compiled with numba."""

from __future__ import annotations

from typing import TYPE_CHECKING

import numpy as np
from numba import njit

from ...design import orient_offsets
from .coarse import blockage_cover
from .lp import _solve_axis
from .tuning import (
    _DISP_WEIGHT,
    _EPS,
    _PACK_OBSTACLES,
    _POLISH_PER_MACRO,
    _RUN_PER_MACRO,
    _SPREAD_MAX,
    _SWAP_WINDOW,
    _T0,
)

if TYPE_CHECKING:
    from .problem import _Problem

# ---------------------------------------------------------------------------------------------
# the complete fallback: fixed-outline packing by sequence pair


class _Packer:
    """Fixed-outline packing of the macros of M from a sequence pair.

    A sequence pair ``(G+, G-)`` over M and the obstacles (footprints of macros that stay, and
    blockages) fixes one relation per pair: ``a`` before ``b`` in both sequences means ``a``
    left of ``b``; ``a`` after ``b`` in ``G+`` and before it in ``G-`` means ``a`` below ``b``
    (Murata, Fujiyoshi, Nakatake, Kajitani, ICCAD 1995).  Positions are grid indices.  The
    packing puts every macro at its least position along each axis: the longest path in the
    constraint graph of that axis from the lower bounds (core, die margin for the halo, and
    the far side of every obstacle the pair puts to its left / below), with separations of
    the footprint plus the larger facing halo.  Obstacles are not moved: one the pair puts to
    the right of (above) a macro is an upper bound on it.  Since these are difference
    constraints, the least solution satisfies every upper bound exactly when some solution
    does, so a packing is legal iff its *violation* -- the total amount by which macros
    exceed their upper bounds, in µm -- is zero.
    """

    def __init__(self, prob: _Problem):
        self.prob = prob
        n = len(prob.idx)
        boxes, halos, is_blk = self._obstacles()
        self.n, self.m = n, len(boxes)
        px, py, ox, oy = prob.px, prob.py, prob.ox, prob.oy
        w, h, lf, b, r, t = prob.w, prob.h, prob.l, prob.b, prob.r, prob.t
        # separations between macros (grid steps), row macro before column macro
        self.sx = np.ceil((w[:, None] + np.maximum(r[:, None], lf[None, :])) / px - _EPS)
        self.sy = np.ceil((h[:, None] + np.maximum(t[:, None], b[None, :])) / py - _EPS)
        # obstacle o (rows) against macro a (columns): least k right of / above o, largest k
        # left of / below o (exact float fix-ups as in the LP bounds)
        nb = ~is_blk[:, None]
        pl = np.maximum(lf[None, :], halos[:, 2:3]) * nb
        pr = np.maximum(r[None, :], halos[:, 0:1]) * nb
        pb = np.maximum(b[None, :], halos[:, 3:4]) * nb
        pt = np.maximum(t[None, :], halos[:, 1:2]) * nb
        o = boxes[:, :, None]
        lbx = np.ceil((o[:, 2] + pl - ox) / px - _EPS)
        lbx += (ox + lbx * px) - pl < o[:, 2]
        ubx = np.floor((o[:, 0] - w - pr - ox) / px + _EPS)
        ubx -= ((ox + ubx * px) + w) + pr > o[:, 0]
        lby = np.ceil((o[:, 3] + pb - oy) / py - _EPS)
        lby += (oy + lby * py) - pb < o[:, 3]
        uby = np.floor((o[:, 1] - h - pt - oy) / py + _EPS)
        uby -= ((oy + uby * py) + h) + pt > o[:, 1]
        self.lbx, self.ubx, self.lby, self.uby = lbx, ubx, lby, uby
        self.nets = self._nets()
        # separations that depend on the first macro only (no halos, or halos that never
        # exceed the facing ones) allow the O(n log n) evaluation
        self.wx, self.wy = self.sx[:, -1].copy(), self.sy[:, -1].copy()
        self.node = bool((self.sx == self.wx[:, None]).all()
                         and (self.sy == self.wy[:, None]).all())

        # the starting pair from the input positions (centres, scaled to the core), obstacles
        # where they are: G+ by u - v, G- by u + v
        c = prob.core
        cx = np.concatenate([prob.x0 + w / 2, (boxes[:, 0] + boxes[:, 2]) / 2])
        cy = np.concatenate([prob.y0 + h / 2, (boxes[:, 1] + boxes[:, 3]) / 2])
        u = (cx - c[0]) / max(c[2] - c[0], 1e-300)
        v = (cy - c[1]) / max(c[3] - c[1], 1e-300)
        ids = np.arange(n + self.m)
        self.gp = np.lexsort((ids, u - v))
        self.gm = np.lexsort((ids, u + v))

    def _obstacles(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """The problem's obstacles, with more than :data:`_PACK_OBSTACLES` blockages replaced
        by a raster cover of them (:func:`blockage_cover`, finest cell a quarter of the
        smallest macro side); ``self.covered`` is the number of covering rectangles (0 when
        the blockages are used as they are)."""
        prob = self.prob
        boxes, halos, is_blk = prob.obstacles()
        self.covered = 0
        if int(is_blk.sum()) <= _PACK_OBSTACLES:
            return boxes, halos, is_blk
        keep = ~is_blk
        limit = max(1, _PACK_OBSTACLES - int(keep.sum()))
        cell = 0.25 * float(min(prob.w.min(), prob.h.min())) if len(prob.w) else 1.0
        cover = blockage_cover(boxes[is_blk], prob.core, limit, max(cell, 1e-9))
        self.covered = len(cover)
        return (np.concatenate([boxes[keep], cover]),
                np.concatenate([halos[keep], np.zeros((len(cover), 4))]),
                np.concatenate([np.zeros(int(keep.sum()), bool), np.ones(len(cover), bool)]))

    def budget(self) -> int:
        """Default annealing budget: about 1.5e10 elementary steps (a move costs O(n log n)
        with node weights, O(n²) otherwise, plus the pins of the macros' nets and one bound
        per macro and obstacle, counted 1.5 times), at most 10,000,000 moves -- about 15-20 s
        on one idle core whatever the number of macros and blockages, under 30 s on a loaded
        one (the hardening issue's bound).  The bounds' weight keeps the blockage-heavy runs
        at about 1e10 steps; the macro-only ones keep the full budget (GSRC n300 packs to 5.03e5
        µm with it, 6.66e5 with a fifth fewer moves)."""
        n = self.n
        steps = (2 * n * np.log2(n + 1) if self.node else n * n) + len(self.nets[1]) \
            + 1.5 * n * self.m + 4 * (n + self.m)
        return int(np.clip(1.5e10 / steps, 1000, 10_000_000))

    def _nets(self):
        """The nets touching M in CSR form for :func:`_sp_pack`: ``(start, macro or -1, x, y,
        weight)``, pin ``x, y`` being offsets from the macro's lower-left corner (orientation
        applied) or, for pins of blocks that stay, absolute positions."""
        prob = self.prob
        d, fp = prob.design, prob.fp
        nets = d.nets_of(prob.idx)
        deg = d.net_degree[nets]
        first = np.repeat(d.net_start[nets] - (np.cumsum(deg) - deg), deg)
        pins = first + np.arange(int(deg.sum()))
        blk = d.pin_block[pins]
        where = np.full(d.num_blocks, -1, np.int64)
        where[prob.idx] = np.arange(len(prob.idx))
        pin_m = where[blk]
        ax, ay = fp.pin_positions()
        w, h = fp.sizes()
        dx, dy = orient_offsets(d.pin_dx[pins], d.pin_dy[pins], fp.orient[blk])
        mine = pin_m >= 0
        pin_x = np.where(mine, w[blk] / 2 + dx, ax[pins])
        pin_y = np.where(mine, h[blk] / 2 + dy, ay[pins])
        start = np.concatenate([[0], np.cumsum(deg)]).astype(np.int64)
        return start, pin_m, pin_x, pin_y, d.net_weight[nets].astype(np.float64)

    def search(self, moves: int, seed: int, report) -> tuple[np.ndarray, np.ndarray] | None:
        """Simulated annealing over sequence-pair moves (see :func:`_sp_anneal`) minimising the
        violation; ``(kx, ky)`` of the first legal packing after :meth:`spread`, or None when
        ``moves`` are spent.

        The budget is spent in runs of ``max(30000, min(moves / 2, 5000 n))`` moves, each
        cooling from the same temperature to zero; runs start alternately from the starting
        pair and from a random pair, each with its own random stream, and each weighs the
        quality term half as much as the one before.  A legal packing is then polished
        (:func:`_sp_anneal` with ``polish``)."""
        prob = self.prob
        n = self.n
        tx = (prob.x0 - prob.ox) / prob.px  # targets, grid units
        ty = (prob.y0 - prob.oy) / prob.py
        args = (n, self.sx, self.sy, self.node, self.wx, self.wy, self.lbx, self.ubx, self.lby,
                self.uby, prob.kx0, prob.kx1, prob.ky0, prob.ky1, prob.px, prob.py, tx, ty,
                *self.nets, prob.ox, prob.oy)
        kx, ky = np.zeros(n), np.zeros(n)
        hix, hiy = np.zeros(n), np.zeros(n)
        t0 = _T0 * float(np.median(np.concatenate([prob.w, prob.h])))
        chunk = 2000
        run_length = max(30_000, min(moves // 2, _RUN_PER_MACRO * n))
        done = 0
        run = 0
        win = max(int(_SWAP_WINDOW * n), min(n + self.m, 10))
        lam = None
        state = np.array([np.inf, t0, 0.0])
        rng = np.random.default_rng(seed)
        while done < moves and state[0] > 0:
            gp, gm = self.gp.copy(), self.gm.copy()
            if run % 2:  # every other run from a random pair, to leave a deep basin behind
                gp, gm = rng.permutation(gp), rng.permutation(gm)
            viol, qual = _sp_pack(gp, gm, *args, kx, ky, hix, hiy)
            if lam is None:  # the quality term weighs like _DISP_WEIGHT x displacement
                disp = (np.abs(kx - tx).sum() * prob.px + np.abs(ky - ty).sum() * prob.py)
                lam = _DISP_WEIGHT * disp / max(qual, 1e-300)
            state = np.array([viol, t0, qual])
            length = min(run_length, moves - done)
            for start in range(0, length, chunk):
                stop = min(length, start + chunk)
                _sp_anneal(gp, gm, *args, kx, ky, hix, hiy, state, start, stop, length,
                           seed * 7919 + run * 104729, lam / 2 ** run, win, False)
                done += stop - start
                report("legalize", 0.3 + 0.3 * done / moves,
                       {"stage": "packing", "violation": float(state[0]), "restarts": run})
                if state[0] <= 0:
                    break
            run += 1
        if state[0] > 0:
            return None
        # polish: lower the quality term among legal packings only
        length = min(_POLISH_PER_MACRO * n, moves // 10)
        state[1] = t0 * 0.1
        for start in range(0, length, chunk):
            _sp_anneal(gp, gm, *args, kx, ky, hix, hiy, state, start,
                       min(length, start + chunk), length, seed * 7919 + 15485863, 1.0, win,
                       True)
            report("legalize", 0.6, {"stage": "polish", "quality": float(state[2])})
        self.gp, self.gm = gp, gm
        return self.spread(kx, ky, hix, hiy)

    def spread(self, kx, ky, hix, hiy) -> tuple[np.ndarray, np.ndarray]:
        """Minimum L1 displacement from the targets keeping every relation of the pair: one
        LP per axis over all pair constraints (the white-space distribution of Tang, Tian,
        Wong, ASP-DAC 2005, from memory); the packed positions stay if HiGHS fails, and above
        :data:`_SPREAD_MAX` macros (n² / 2 constraints), where the trust-region LP of
        :meth:`_Problem.lp_improve` does this work instead."""
        prob, n = self.prob, self.n
        if n > _SPREAD_MAX:
            return kx, ky
        pp = np.empty(len(self.gp), np.intp)
        pm = np.empty(len(self.gm), np.intp)
        pp[self.gp] = np.arange(len(pp))
        pm[self.gm] = np.arange(len(pm))
        i, j = np.triu_indices(n, 1)
        bp, bm = pp[i] < pp[j], pm[i] < pm[j]
        horiz = bp == bm  # i left of j (both before) or right of it (both after)
        lo_x = np.where(bp, i, j)[horiz]
        hi_x = np.where(bp, j, i)[horiz]
        lo_y = np.where(bm, i, j)[~horiz]  # the one below comes first in G-
        hi_y = np.where(bm, j, i)[~horiz]
        tx = np.round((prob.x0 - prob.ox) / prob.px)
        ty = np.round((prob.y0 - prob.oy) / prob.py)
        lox, loy = self.lower_bounds(pp, pm)  # from the core and the obstacles
        nx_ = _solve_axis(n, lo_x, hi_x, self.sx[lo_x, hi_x], np.clip(tx, lox, hix), lox, hix)
        ny_ = _solve_axis(n, lo_y, hi_y, self.sy[lo_y, hi_y], np.clip(ty, loy, hiy), loy, hiy)
        return (kx if nx_ is None else nx_), (ky if ny_ is None else ny_)

    def lower_bounds(self, pp, pm) -> tuple[np.ndarray, np.ndarray]:
        """Per-macro lower bounds (grid indices) from the core and the obstacles the pair puts
        to its left / below."""
        prob, n = self.prob, self.n
        lox, loy = prob.kx0.copy(), prob.ky0.copy()
        if self.m:
            ap, am = pp[:n], pm[:n]
            op, om = pp[n:, None], pm[n:, None]
            lox = np.maximum(lox, np.where((op < ap) & (om < am), self.lbx, -np.inf).max(0))
            loy = np.maximum(loy, np.where((op > ap) & (om < am), self.lby, -np.inf).max(0))
        return lox, loy


@njit(cache=True)
def _sp_pack(gp, gm, n, sx, sy, node, wx, wy, lbx, ubx, lby, uby, kx0, kx1, ky0, ky1, px, py,
             tx, ty,
             ns, pin_m, pin_x, pin_y, nw, ox, oy,
             kx, ky, hix, hiy):  # pragma: no cover (compiled)
    """Pack sequence pair ``(gp, gm)`` into ``kx, ky`` (the least positions, which are also
    the lower bounds they met) with upper bounds ``hix, hiy``; return the violation and the
    quality, both in µm.  The quality is the weighted HPWL of the nets ``ns`` (CSR over pins:
    ``pin_m`` the macro or -1, ``pin_x, pin_y`` the offset from its lower-left corner or the
    fixed position), or without nets the L1 displacement from the targets ``tx, ty``.
    Elements ``< n`` are macros, the others obstacles."""
    tot = len(gp)
    m = tot - n
    pp = np.empty(tot, np.int64)
    pm = np.empty(tot, np.int64)
    for q in range(tot):
        pp[gp[q]] = q
        pm[gm[q]] = q
    lox = kx0.copy()
    loy = ky0.copy()
    for a in range(n):
        hx, hy = kx1[a], ky1[a]
        for o in range(m):
            bp = pp[n + o] < pp[a]
            bm = pm[n + o] < pm[a]
            if bp and bm:  # obstacle left of a
                lox[a] = max(lox[a], lbx[o, a])
            elif not bp and not bm:  # right of a
                hx = min(hx, ubx[o, a])
            elif bm:  # below a
                loy[a] = max(loy[a], lby[o, a])
            else:  # above a
                hy = min(hy, uby[o, a])
        hix[a], hiy[a] = hx, hy
    viol = 0.0
    disp = 0.0
    if node:  # longest paths with node weights: prefix maxima in a Fenwick tree
        _fenwick_longest(gp, pm, n, wx, lox, kx, False)
        _fenwick_longest(gm, pp, n, wy, loy, ky, True)
        for b in range(n):
            viol += max(0.0, kx[b] - hix[b]) * px + max(0.0, ky[b] - hiy[b]) * py
            disp += abs(kx[b] - tx[b]) * px + abs(ky[b] - ty[b]) * py
    for q in range(tot if not node else 0):  # 'left of': topological in G+ order
        b = gp[q]
        if b >= n:
            continue
        v = lox[b]
        for q2 in range(q):
            a = gp[q2]
            if a < n and pm[a] < pm[b]:
                v = max(v, kx[a] + sx[a, b])
        kx[b] = v
        viol += max(0.0, v - hix[b]) * px
        disp += abs(v - tx[b]) * px
    for q in range(tot if not node else 0):  # 'below': topological in G- order
        b = gm[q]
        if b >= n:
            continue
        v = loy[b]
        for q2 in range(q):
            a = gm[q2]
            if a < n and pp[a] > pp[b]:
                v = max(v, ky[a] + sy[a, b])
        ky[b] = v
        viol += max(0.0, v - hiy[b]) * py
        disp += abs(v - ty[b]) * py
    if len(ns) > 1:
        disp = 0.0
        for k in range(len(ns) - 1):
            x0 = y0 = np.inf
            x1 = y1 = -np.inf
            for p in range(ns[k], ns[k + 1]):
                m = pin_m[p]
                x, y = pin_x[p], pin_y[p]
                if m >= 0:
                    x += ox + kx[m] * px
                    y += oy + ky[m] * py
                x0, x1, y0, y1 = min(x0, x), max(x1, x), min(y0, y), max(y1, y)
            disp += nw[k] * ((x1 - x0) + (y1 - y0))
    return viol, disp


@njit(cache=True)
def _fenwick_longest(order, key, n, wt, lo, k, reverse):  # pragma: no cover (compiled)
    """Longest paths with node weights along a sequence pair: for the macros in ``order``,
    ``k[b] = max(lo[b], max k[a] + wt[a])`` over the macros ``a`` earlier in ``order`` with a
    smaller ``key`` (a larger one with ``reverse``), by prefix maxima in a Fenwick tree over
    the keys -- the LCS-style evaluation of Tang, Tian, Wong (DATE 2000) in O(n log n)."""
    tot = len(order)
    tree = np.full(tot + 1, -np.inf)
    for q in range(tot):
        b = order[q]
        if b >= n:
            continue
        j = tot - key[b] - 1 if reverse else key[b]  # 0-based; query the keys below j
        best = lo[b]
        i = j
        while i > 0:
            if tree[i] > best:
                best = tree[i]
            i -= i & (-i)
        k[b] = best
        i = j + 1
        v = best + wt[b]
        while i <= tot:
            if tree[i] < v:
                tree[i] = v
            i += i & (-i)


@njit(cache=True)
def _move_next_to(seq, a, b, after):  # pragma: no cover (compiled)
    """Take ``a`` out of ``seq`` and put it just before (``after`` False) or after ``b``."""
    ia = 0
    while seq[ia] != a:
        ia += 1
    for q in range(ia, len(seq) - 1):
        seq[q] = seq[q + 1]
    ib = 0
    while seq[ib] != b:
        ib += 1
    at = ib + 1 if after else ib
    for q in range(len(seq) - 1, at, -1):
        seq[q] = seq[q - 1]
    seq[at] = a


@njit(cache=True)
def _overshooter(n, kx, ky, hix, hiy, px, py):  # pragma: no cover
    """A random macro overshooting its bound along the worse axis (``on_x``: x), drawn from
    the annealer's random stream."""
    vx = 0.0
    vy = 0.0
    for q in range(n):
        vx += max(0.0, kx[q] - hix[q]) * px
        vy += max(0.0, ky[q] - hiy[q]) * py
    on_x = vx >= vy
    cnt = 0
    for q in range(n):
        if (kx[q] > hix[q]) if on_x else (ky[q] > hiy[q]):
            cnt += 1
    pick = np.random.randint(0, cnt)
    a = 0
    for q in range(n):
        if (kx[q] > hix[q]) if on_x else (ky[q] > hiy[q]):
            if pick == 0:
                a = q
                break
            pick -= 1
    return a, on_x


@njit(cache=True)
def _sp_anneal(gp, gm, n, sx, sy, node, wx, wy, lbx, ubx, lby, uby, kx0, kx1, ky0, ky1, px,
               py, tx, ty,
               ns, pin_m, pin_x, pin_y, nw, ox, oy, kx, ky, hix, hiy, state, start, stop,
               total, seed, lam, win, polish):  # pragma: no cover
    """Annealing moves ``start .. stop`` of ``total`` on ``(gp, gm)`` in place; ``state`` holds
    ``(violation, initial temperature, quality)``.  The cost is the violation plus ``lam``
    times the quality of the packing (:func:`_sp_pack`: the HPWL of the nets touching the
    macros, or their displacement when there are none), that weight fading to zero over the
    run so that the run ends on legality alone; it stops at the first legal packing.  Moves,
    all local (the partner lies at most ``win`` places away in a sequence, so the pair keeps
    the input's relative order away from the move): swap a macro with another element in G+,
    in G- or in both, or the slack-driven move of Adya and Markov (IEEE TVLSI 2003): a macro
    that overshoots its bound along the worse axis is stacked next to the nearby macro with
    the most room across it.  With ``polish`` the pair is legal already and stays so: only legal
    packings are accepted and the cost is the quality.  Deterministic for a given
    ``seed``."""
    np.random.seed(seed + start)
    tot = len(gp)
    viol = state[0]
    t0 = state[1]
    disp = state[2]
    cost = viol + lam * disp
    tp = gp.copy()
    tm = gm.copy()
    nkx = kx.copy()
    nky = ky.copy()
    nhx = hix.copy()
    nhy = hiy.copy()
    for it in range(start, stop):
        if viol <= 0.0 and not polish:
            break
        frac = 1.0 - it / total
        temp = t0 * frac * frac + 1e-9
        w_d = 1.0 if polish else lam * frac  # fading out: a run ends on legality alone
        cost = viol + w_d * disp
        tp[:] = gp
        tm[:] = gm
        kind = np.random.randint(0, 3 if polish else 4)  # (no overshoot to chase in polish)
        if kind < 3 or n < 2:  # swap with an element at most `win` places away in one sequence
            a = np.random.randint(0, n)
            seq = tm if kind == 1 else tp
            qa = 0
            while seq[qa] != a:
                qa += 1
            lo = max(0, qa - win)
            hi = min(tot - 1, qa + win)
            qb = lo + np.random.randint(0, hi - lo)
            if qb >= qa:
                qb += 1
            b = seq[qb]
            if kind != 1:
                for q in range(tot):
                    if tp[q] == a:
                        tp[q] = b
                    elif tp[q] == b:
                        tp[q] = a
            if kind != 0:
                for q in range(tot):
                    if tm[q] == a:
                        tm[q] = b
                    elif tm[q] == b:
                        tm[q] = a
        else:
            a, on_x = _overshooter(n, kx, ky, hix, hiy, px, py)
            # b: the macro with the most room across among a few drawn near a in a sequence
            seq = tm if np.random.randint(0, 2) == 1 else tp
            qa = 0
            while seq[qa] != a:
                qa += 1
            lo = max(0, qa - win)
            hi = min(tot - 1, qa + win)
            b = -1
            best = -np.inf
            for _ in range(8):
                c = seq[lo + np.random.randint(0, hi - lo + 1)]
                if c == a or c >= n:
                    continue
                room = (hiy[c] - ky[c]) if on_x else (hix[c] - kx[c])
                if room > best:
                    best, b = room, c
            if b < 0:
                continue
            after = np.random.randint(0, 2) == 1
            if on_x:  # stack: a below b (after in G+, before in G-) or above (the opposite)
                _move_next_to(tp, a, b, after)
                _move_next_to(tm, a, b, not after)
            else:  # side by side: right of b (after in both) or left (before in both)
                _move_next_to(tp, a, b, after)
                _move_next_to(tm, a, b, after)
        v2, d2 = _sp_pack(tp, tm, n, sx, sy, node, wx, wy, lbx, ubx, lby, uby, kx0, kx1, ky0,
                          ky1, px, py, tx, ty, ns, pin_m, pin_x, pin_y, nw, ox, oy, nkx, nky,
                          nhx, nhy)
        c2 = v2 + w_d * d2
        if polish and v2 > 0.0:
            continue
        if c2 <= cost or np.random.random() < np.exp(-(c2 - cost) / temp):
            gp[:] = tp
            gm[:] = tm
            kx[:] = nkx
            ky[:] = nky
            hix[:] = nhx
            hiy[:] = nhy
            cost, viol, disp = c2, v2, d2
    state[0] = viol
    state[2] = disp
