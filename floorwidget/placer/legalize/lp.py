"""Step 5 of the legaliser: minimum-L1-displacement LP rounds over the horizontal and vertical
constraint graphs (Liao, Wong, IEEE TCAD 2(2), 1983; Tang, Tian, Wong, ASP-DAC 2005; both from
memory), with HiGHS through ``scipy.optimize.linprog``."""

from __future__ import annotations

import numpy as np
from scipy import sparse
from scipy.optimize import linprog

from ...kernels import rects
from .tuning import _EPS


class _LPMixin:
    """The LP methods of :class:`~floorwidget.placer.legalize.problem._Problem`."""

    def lp_improve(self, x, y, rounds: int, trust: float | None):
        """Minimum-L1-displacement LP rounds keeping the relative order of ``(x, y)``."""
        n = len(x)
        if n == 0:
            return x, y, 0
        if trust is None:
            trust = float(np.median(np.maximum(self.w, self.h)))
        done = 0
        cost = self.displacement(x, y)
        for _ in range(rounds):
            res = self._lp_round(x, y, trust)
            if res is None:
                break
            nx_, ny_ = self.nudge(*res)
            bad, i, j = self.violations(nx_, ny_)
            if bad.any() or len(i):
                nx_, ny_ = self.repair(nx_, ny_, bad, i, j, None)
                if nx_ is None:
                    break
            new_cost = self.displacement(nx_, ny_)
            if new_cost >= cost - 1e-9:
                break
            done += 1
            improved = cost - new_cost
            x, y, cost = nx_, ny_, new_cost
            if improved < 0.005 * max(cost, 1e-9):
                break
        return x, y, done

    def nudge(self, x, y, rounds: int = 30):
        """Clear the overlaps of a few ulps that floating point leaves where two halo boxes
        abut exactly (a separation that is a whole number of pitches), by moving the right or
        upper macro of such a pair by a few ulps.  Positions stay on the grid within far less
        than the 1e-6 µm grid tolerance; real overlaps are left for the repair."""
        x, y = x.copy(), y.copy()
        for _ in range(rounds):
            hb = self.halo_boxes(x, y)
            fb = self.foot_boxes(x, y)
            i, j = rects.overlap_pairs(fb, hb)  # footprint i against halo box j
            keep = i != j
            i, j = i[keep], j[keep]
            if not len(i):
                break
            ox = np.minimum(fb[i, 2], hb[j, 2]) - np.maximum(fb[i, 0], hb[j, 0])
            oy = np.minimum(fb[i, 3], hb[j, 3]) - np.maximum(fb[i, 1], hb[j, 1])
            tiny = np.minimum(ox, oy) <= 1e-7
            if not tiny.any():
                break
            i, j, ox, oy = i[tiny], j[tiny], ox[tiny], oy[tiny]
            on_x = ox <= oy
            for axis, v, lo, hi, ov in ((on_x, x, 0, 2, ox), (~on_x, y, 1, 3, oy)):
                if not axis.any():
                    continue
                a, b = i[axis], j[axis]
                upper = np.where(fb[a, lo] + fb[a, hi] >= fb[b, lo] + fb[b, hi], a, b)
                step = np.zeros(len(v))
                np.maximum.at(step, upper, 2 * ov[axis] + 4 * np.spacing(np.abs(v[upper]) + 1))
                v += step
        return x, y

    def displacement(self, x, y) -> float:
        return float(np.abs(x - self.x0).sum() + np.abs(y - self.y0).sum())

    def _lp_round(self, x, y, trust):
        n = len(x)
        ox, oy, px, py = self.ox, self.oy, self.px, self.py
        kx = np.round((x - ox) / px)
        ky = np.round((y - oy) / py)
        tx = np.clip(np.round((self.x0 - ox) / px), self.kx0, self.kx1)
        ty = np.clip(np.round((self.y0 - oy) / py), self.ky0, self.ky1)
        dkx, dky = np.floor(trust / px), np.floor(trust / py)
        lox, hix = np.maximum(self.kx0, kx - dkx), np.minimum(self.kx1, kx + dkx)
        loy, hiy = np.maximum(self.ky0, ky - dky), np.minimum(self.ky1, ky + dky)
        if (kx < lox).any() or (kx > hix).any() or (ky < loy).any() or (ky > hiy).any():
            return None
        hb = self.halo_boxes(x, y)
        grow = np.array([-trust, -trust, trust, trust])
        w, h, lf, b, r, t = self.w, self.h, self.l, self.b, self.r, self.t
        # --- macro pairs that could meet: choose one satisfied separation per pair
        i, j = rects.overlap_pairs(hb + grow)
        if len(i):
            sep = np.stack([  # bodies apart by the larger facing halo (the halo rule)
                np.ceil((w[i] + np.maximum(r[i], lf[j])) / px - _EPS),  # i left of j
                np.ceil((w[j] + np.maximum(r[j], lf[i])) / px - _EPS),  # j left of i
                np.ceil((h[i] + np.maximum(t[i], b[j])) / py - _EPS),  # i below j
                np.ceil((h[j] + np.maximum(t[j], b[i])) / py - _EPS),  # j below i
            ], axis=1)
            cur = np.stack([kx[j] - kx[i], kx[i] - kx[j], ky[j] - ky[i], ky[i] - ky[j]], axis=1)
            tgt = np.stack([tx[j] - tx[i], tx[i] - tx[j], ty[j] - ty[i], ty[i] - ty[j]], axis=1)
            ok = cur >= sep
            if not ok.any(1).all():
                return None
            slack = np.where(ok, (tgt - sep) * np.array([px, px, py, py]), -np.inf)
            rel = np.argmax(slack, axis=1)
            lo_i = np.where(rel % 2 == 0, i, j)  # the one on the left / below
            hi_i = np.where(rel % 2 == 0, j, i)
            csep = sep[np.arange(len(i)), rel]
            on_x = rel < 2
        else:
            lo_i = hi_i = np.zeros(0, np.intp)
            csep = np.zeros(0)
            on_x = np.zeros(0, bool)
        # --- macro-obstacle and macro-blockage pairs become bounds
        boxes, halos, is_blk = self.obstacles()
        if len(boxes):
            a, o = rects.overlap_pairs(hb + grow, rects.grow(boxes, halos))
        else:
            a = o = np.zeros(0, np.intp)
        if len(a):
            pl, pb, pr, pt = self.pads(a, halos[o], ~is_blk[o])
            oo = boxes[o]
            # largest k left of / below the obstacle, smallest k right of / above it
            kl = np.floor((oo[:, 0] - w[a] - pr - ox) / px + _EPS)
            kl -= ((ox + kl * px) + w[a]) + pr > oo[:, 0]
            kr = np.ceil((oo[:, 2] + pl - ox) / px - _EPS)
            kr += (ox + kr * px) - pl < oo[:, 2]
            kb = np.floor((oo[:, 1] - h[a] - pt - oy) / py + _EPS)
            kb -= ((oy + kb * py) + h[a]) + pt > oo[:, 1]
            ka = np.ceil((oo[:, 3] + pb - oy) / py - _EPS)
            ka += (oy + ka * py) - pb < oo[:, 3]
            ok = np.stack([kx[a] <= kl, kx[a] >= kr, ky[a] <= kb, ky[a] >= ka], axis=1)
            if not ok.any(1).all():
                return None
            slack = np.stack([(kl - tx[a]) * px, (tx[a] - kr) * px,
                              (kb - ty[a]) * py, (ty[a] - ka) * py], axis=1)
            rel = np.argmax(np.where(ok, slack, -np.inf), axis=1)
            for q, arr, fn, val in ((0, hix, np.minimum, kl), (1, lox, np.maximum, kr),
                                    (2, hiy, np.minimum, kb), (3, loy, np.maximum, ka)):
                m = rel == q
                if m.any():
                    fn.at(arr, a[m], val[m])
        newx = _solve_axis(n, lo_i[on_x], hi_i[on_x], csep[on_x], tx, lox, hix)
        newy = _solve_axis(n, lo_i[~on_x], hi_i[~on_x], csep[~on_x], ty, loy, hiy)
        if newx is None or newy is None:
            return None
        # keep bit-exact coordinates where the grid index did not change
        nx_ = np.where(newx == kx, x, self.gx(newx))
        ny_ = np.where(newy == ky, y, self.gy(newy))
        return nx_, ny_


def _solve_axis(n, lo_i, hi_i, sep, tgt, lo, hi):
    """min sum |k - tgt| s.t. k[hi_i] - k[lo_i] >= sep, lo <= k <= hi (HiGHS)."""
    m = len(lo_i)
    # variables: k (n) then t (n); rows: separations, then t >= k - tgt, t >= tgt - k
    rows = np.concatenate([np.arange(m), np.arange(m), m + np.arange(n), m + np.arange(n),
                           m + n + np.arange(n), m + n + np.arange(n)])
    cols = np.concatenate([lo_i, hi_i, np.arange(n), n + np.arange(n), np.arange(n),
                           n + np.arange(n)])
    vals = np.concatenate([np.ones(m), -np.ones(m), np.ones(n), -np.ones(n), -np.ones(n),
                           -np.ones(n)])
    a = sparse.csr_matrix((vals, (rows, cols)), shape=(m + 2 * n, 2 * n))
    rhs = np.concatenate([-sep, tgt, -tgt])
    c = np.concatenate([np.zeros(n), np.ones(n)])
    bounds = np.concatenate([np.stack([lo, hi], 1),
                             np.stack([np.zeros(n), np.full(n, np.inf)], 1)])
    res = linprog(c, A_ub=a, b_ub=rhs, bounds=bounds, method="highs")
    if res.status != 0:
        return None
    k = np.round(res.x[:n])
    if (k < lo).any() or (k > hi).any() or (k[hi_i] - k[lo_i] < sep).any():
        return None
    return k
