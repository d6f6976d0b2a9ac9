"""The legalisation problem of one set of macros: bounds, boxes, violations, the nearest free
spot search (step 4) and the local repair (step 3)."""

from __future__ import annotations

import numpy as np

from ...design import MACRO, Design, Floorplan, off_grid
from ...kernels import rects
from ..constraints import macro_keepouts
from .coarse import covered_cells
from .lp import _LPMixin
from .tuning import _EPS, _GRID_TOL, _RASTER_CELLS, _RASTER_OBSTACLES

# ---------------------------------------------------------------------------------------------
# the problem: movable macros (the set M) against obstacles


class _Problem(_LPMixin):
    """Arrays for the macros to legalise (``M``) and everything they must avoid."""

    def __init__(self, design: Design, fp: Floorplan, move: np.ndarray):
        self.design = design
        self.fp = fp  # the input (read only)
        self.idx = np.flatnonzero(move)  # block indices of M
        w, h = fp.sizes()
        hl = design.halo
        ii = self.idx
        self.w, self.h = w[ii], h[ii]
        self.l, self.b, self.r, self.t = (hl[ii, k].copy() for k in range(4))
        self.x0, self.y0 = fp.x[ii].copy(), fp.y[ii].copy()
        self.core = design.core
        self.die = design.die
        self.ox, self.oy = (float(v) for v in design.grid_origin)
        self.px, self.py = (float(v) for v in design.grid_pitch)
        obst = (design.kind == MACRO) & ~move
        self.obst = fp.rects()[obst]  # footprints of the macros that stay
        self.obst_halo = hl[obst].copy()  # and their halos (left, bottom, right, top)
        self.blk = np.asarray(macro_keepouts(design), dtype=np.float64).reshape(-1, 4)
        self.area = (self.w + self.l + self.r) * (self.h + self.b + self.t)
        self._blk_maps: dict[tuple, np.ndarray] = {}  # see _blockage_map
        self._bounds()

    # --- grid <-> µm ---------------------------------------------------------------------
    def gx(self, k):
        return self.ox + k * self.px

    def gy(self, k):
        return self.oy + k * self.py

    def _bounds(self) -> None:
        """Grid-index range of each macro's lower-left corner (footprint in core, halo in die)."""
        c, d = self.core, self.die
        w, h, lf, b, r, t = self.w, self.h, self.l, self.b, self.r, self.t
        kx0 = np.ceil((np.maximum(c[0], d[0] + lf) - self.ox) / self.px - _EPS)
        ky0 = np.ceil((np.maximum(c[1], d[1] + b) - self.oy) / self.py - _EPS)
        kx1 = np.floor((np.minimum(c[2] - w, d[2] - w - r) - self.ox) / self.px + _EPS)
        ky1 = np.floor((np.minimum(c[3] - h, d[3] - h - t) - self.oy) / self.py + _EPS)
        for _ in range(2):  # exact float fix-ups (one step suffices; two for safety)
            x = self.gx(kx0)
            kx0 = kx0 + ((x < c[0]) | (x - lf < d[0]))
            y = self.gy(ky0)
            ky0 = ky0 + ((y < c[1]) | (y - b < d[1]))
            x = self.gx(kx1)
            kx1 = kx1 - ((x + w > c[2]) | ((x + w) + r > d[2]))
            y = self.gy(ky1)
            ky1 = ky1 - ((y + h > c[3]) | ((y + h) + t > d[3]))
        self.kx0, self.kx1, self.ky0, self.ky1 = kx0, kx1, ky0, ky1

    def pads(self, i, halo: np.ndarray, nb) -> tuple[np.ndarray, ...]:
        """Gaps ``(left, bottom, right, top)`` macro(s) ``i`` keep from footprints with halos
        ``halo``: the larger of the two facing halos (zero where ``nb`` is False)."""
        return (np.maximum(self.l[i], halo[:, 2]) * nb, np.maximum(self.b[i], halo[:, 3]) * nb,
                np.maximum(self.r[i], halo[:, 0]) * nb, np.maximum(self.t[i], halo[:, 1]) * nb)

    # --- boxes ---------------------------------------------------------------------------
    def halo_boxes(self, x, y, sel=slice(None)):
        w, h = self.w[sel], self.h[sel]
        return np.stack([x - self.l[sel], y - self.b[sel], (x + w) + self.r[sel],
                         (y + h) + self.t[sel]], axis=1)

    def foot_boxes(self, x, y, sel=slice(None)):
        return np.stack([x, y, x + self.w[sel], y + self.h[sel]], axis=1)

    def obstacles(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """``(boxes, halos, is_blockage)`` of everything the macros of M must avoid:
        footprints of the macros that stay (with their halos), then blockages (no halo)."""
        boxes = np.concatenate([self.obst, self.blk])
        halos = np.concatenate([self.obst_halo, np.zeros((len(self.blk), 4))])
        is_blk = np.arange(len(boxes)) >= len(self.obst)
        return boxes, halos, is_blk

    def violations(self, x, y) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """``(bad_self, I, J)``: per-macro violations (bounds, grid, blockage, obstacle) and
        the conflicting pairs within M (positions indices into M, ``I < J``) under the halo
        rule: a footprint may not overlap another macro's halo box."""
        c, d = self.core, self.die
        w, h = self.w, self.h
        bad = (x < c[0]) | (y < c[1]) | (x + w > c[2]) | (y + h > c[3])
        hb = self.halo_boxes(x, y)
        fb = self.foot_boxes(x, y)
        bad |= (hb[:, 0] < d[0]) | (hb[:, 1] < d[1]) | (hb[:, 2] > d[2]) | (hb[:, 3] > d[3])
        bad |= off_grid(x, self.ox, self.px, _GRID_TOL) | off_grid(y, self.oy, self.py, _GRID_TOL)
        if len(self.blk):
            i, _ = rects.overlap_pairs(fb, self.blk)
            bad[i] = True
        if len(self.obst):
            i, _ = rects.overlap_pairs(fb, rects.grow(self.obst, self.obst_halo))
            bad[i] = True
            i, _ = rects.overlap_pairs(hb, self.obst)
            bad[i] = True
        i, j, _ = rects.halo_conflicts(fb, hb)
        return bad, i, j

    # --- nearest free spot ---------------------------------------------------------------
    def nearest_spot(self, i: int, tx: float, ty: float, obs: np.ndarray, obs_halo: np.ndarray,
                     obs_blk: np.ndarray):
        """Grid indices ``(kx, ky)`` of the free spot nearest to ``(tx, ty)`` for macro ``i``
        among obstacles ``obs`` (footprints with halos ``obs_halo``; ``obs_blk`` marks
        blockages, which only the footprint must avoid), or None when there is none.

        Facing sides stand apart by the larger of the two facing halos (the halo rule, made
        rectangular: a pair clear along x or along y by that gap is legal)."""
        kx0, kx1, ky0, ky1 = self.kx0[i], self.kx1[i], self.ky0[i], self.ky1[i]
        if kx0 > kx1 or ky0 > ky1:
            return None
        w, h = self.w[i], self.h[i]
        nb = ~obs_blk
        if len(obs) >= _RASTER_OBSTACLES and \
                (kx1 - kx0 + 1) * (ky1 - ky0 + 1) <= _RASTER_CELLS:
            return self._nearest_on_map(i, tx, ty, obs, obs_halo, obs_blk)
        lp, bp, rp, tp = self.pads(i, obs_halo, nb)
        # configuration-space forbidden (open) rectangles of the lower-left corner
        fx0 = obs[:, 0] - w - rp
        fx1 = obs[:, 2] + lp
        fy0 = obs[:, 1] - h - tp
        fy1 = obs[:, 3] + bp
        xlo, xhi, ylo, yhi = self.gx(kx0), self.gx(kx1), self.gy(ky0), self.gy(ky1)
        # clamp distance from the target to the allowed box, and the radius that covers it all
        cx = min(max(tx, xlo), xhi)
        cy = min(max(ty, ylo), yhi)
        d0 = np.hypot(cx - tx, cy - ty)
        full = np.hypot(max(abs(tx - xlo), abs(tx - xhi)), max(abs(ty - ylo), abs(ty - yhi)))
        full = full * 1.0001 + self.px + self.py
        rad = max(d0 + 0.25 * max(w, h), self.px + self.py)
        # candidate grid lines: the snapped target, the bounds, and for every obstacle in the
        # window the nearest grid line just clear of it on each side (exact float fix-ups: the
        # box expressions x - left and (x + w) + right decide, as everywhere else)
        org = np.array([self.ox, self.oy])
        pitch = np.array([self.px, self.py])
        size = np.array([w, h])
        kt = (np.array([tx, ty]) - org) / pitch
        bx = np.array([np.floor(kt[0]), np.ceil(kt[0]), kx0, kx1])
        by = np.array([np.floor(kt[1]), np.ceil(kt[1]), ky0, ky1])
        tol = 1e-6
        while True:
            last = rad >= full
            if last:
                rad = full
            sel = np.flatnonzero((fx1 > tx - rad - tol) & (fx0 < tx + rad + tol)
                                 & (fy1 > ty - rad - tol) & (fy0 < ty + rad + tol))
            o = obs[sel]
            padlo = np.stack([lp[sel], bp[sel]], 1)
            padhi = np.stack([rp[sel], tp[sel]], 1)
            kr = np.ceil((o[:, 2:] + padlo - org) / pitch - _EPS)
            kr += (org + kr * pitch) - padlo < o[:, 2:]
            kl = np.floor((o[:, :2] - size - padhi - org) / pitch + _EPS)
            kl -= ((org + kl * pitch) + size) + padhi > o[:, :2]
            xs = np.concatenate([bx, kr[:, 0], kl[:, 0]])
            ys = np.concatenate([by, kr[:, 1], kl[:, 1]])
            xs = xs[(xs >= kx0) & (xs <= kx1) & (np.abs(self.gx(xs) - tx) <= rad)]
            ys = ys[(ys >= ky0) & (ys <= ky1) & (np.abs(self.gy(ys) - ty) <= rad)]
            best = None
            if len(xs) and len(ys):
                best, d2 = self._first_free(i, tx, ty, xs, ys, o,
                                            (lp[sel], bp[sel], rp[sel], tp[sel]))
            if last or (best is not None and d2 <= rad * rad):
                return best
            # a free spot found beyond the inscribed circle bounds the optimum's distance
            rad = rad * 2.0 if best is None else float(np.sqrt(d2)) * (1 + 1e-9) + 1e-9

    def _nearest_on_map(self, i, tx, ty, obs, obs_halo, obs_blk):
        """:meth:`nearest_spot` for many obstacles: every grid point of macro ``i``'s allowed
        box on one map, each obstacle's forbidden range of corners (open, with the exact float
        fix-ups of the window search) marked by a 2-D difference array, then the free point
        nearest to ``(tx, ty)``.  Work and memory follow the grid points, not the candidate
        lines squared times the obstacles (which grew past minutes with thousands of small
        blockages).  The blockages' part of the map depends only on the macro's size and
        allowed box, so it is made once per size (:meth:`_blockage_map`) and each call adds
        only the macros."""
        kx0, kx1, ky0, ky1 = (int(v) for v in (self.kx0[i], self.kx1[i], self.ky0[i],
                                                self.ky1[i]))
        nb = np.flatnonzero(~obs_blk)
        if len(obs) - len(nb) == len(self.blk):  # the problem's own blockages: cached
            blocked = self._blockage_map(i)
        else:
            zero = np.zeros(len(obs) - len(nb))
            blocked = self._forbidden(i, obs[obs_blk], (zero, zero, zero, zero))
        if len(nb):
            pads = self.pads(i, obs_halo[nb], np.ones(len(nb), bool))
            blocked = blocked | self._forbidden(i, obs[nb], pads)
        fi, fj = np.nonzero(~blocked)
        if not len(fi):
            return None
        d2 = (self.gx(fi + kx0) - tx) ** 2 + (self.gy(fj + ky0) - ty) ** 2
        q = int(np.argmin(d2))
        return float(fi[q] + kx0), float(fj[q] + ky0)

    def _blockage_map(self, i) -> np.ndarray:
        """Corners of macro ``i``'s allowed box that put its footprint on a blockage, kept
        per (size, box) while the maps together hold at most :data:`_RASTER_CELLS` points."""
        key = (float(self.w[i]), float(self.h[i]), float(self.kx0[i]), float(self.kx1[i]),
               float(self.ky0[i]), float(self.ky1[i]))
        cache = self._blk_maps
        if key not in cache:
            zero = np.zeros(len(self.blk))
            m = self._forbidden(i, self.blk, (zero, zero, zero, zero))
            while cache and sum(v.size for v in cache.values()) + m.size > _RASTER_CELLS:
                cache.pop(next(iter(cache)))
            cache[key] = m
        return cache[key]

    def _forbidden(self, i, obs, pads) -> np.ndarray:
        """Boolean map over macro ``i``'s allowed box of the corners whose footprint (with the
        facing gaps ``pads``) meets an obstacle of ``obs``."""
        lp, bp, rp, tp = pads
        kx0, kx1, ky0, ky1 = (int(v) for v in (self.kx0[i], self.kx1[i], self.ky0[i],
                                                self.ky1[i]))
        org = np.array([self.ox, self.oy])
        pitch = np.array([self.px, self.py])
        size = np.array([self.w[i], self.h[i]])
        padlo = np.stack([lp, bp], 1)
        padhi = np.stack([rp, tp], 1)
        kr = np.ceil((obs[:, 2:] + padlo - org) / pitch - _EPS)  # first corner clear beyond
        kr += (org + kr * pitch) - padlo < obs[:, 2:]
        kl = np.floor((obs[:, :2] - size - padhi - org) / pitch + _EPS)  # last clear before
        kl -= ((org + kl * pitch) + size) + padhi > obs[:, :2]
        lo = np.maximum(kl + 1, [kx0, ky0]).astype(np.int64) - [kx0, ky0]
        hi = np.minimum(kr, [kx1 + 1, ky1 + 1]).astype(np.int64) - [kx0, ky0]  # exclusive
        return covered_cells(lo, hi, (kx1 - kx0 + 1, ky1 - ky0 + 1))

    def _first_free(self, i, tx, ty, kxs, kys, obs, pads):
        """Nearest point of the candidate grid ``kxs x kys`` whose box is free of ``obs``:
        ``(spot or None, squared distance)``.

        A candidate conflicts with obstacle j when it overlaps it along x *and* along y, so the
        conflict matrix is the Boolean product of an (x-candidates x obstacles) and an
        (obstacles x y-candidates) matrix -- one matrix multiplication.  Every comparison uses
        the exact float expressions of the boxes (``x - left``, ``(x + w) + right``)."""
        lp, bp, rp, tp = pads
        xs, ys = self.gx(kxs), self.gy(kys)
        w, h = self.w[i], self.h[i]
        dy2 = (ys - ty) ** 2
        yhit = (((ys[:, None] - bp) < obs[:, 3]) & (obs[:, 1] < ((ys + h)[:, None] + tp)))
        yhit = yhit.astype(np.float32).T
        best, best_d2 = None, np.inf
        step = max(1, min(len(xs), (1 << 20) // max(len(ys), len(obs), 1)))
        for s in range(0, len(xs), step):
            xc = xs[s:s + step]
            xhit = (((xc[:, None] - lp) < obs[:, 2]) & (obs[:, 0] < ((xc + w)[:, None] + rp)))
            hit = (xhit.astype(np.float32) @ yhit) > 0.5
            d2 = ((xc - tx) ** 2)[:, None] + dy2[None, :]
            d2[hit] = np.inf
            q = int(np.argmin(d2))
            v = float(d2.flat[q])
            if v < best_d2:
                best_d2 = v
                best = (float(kxs[s + q // len(ys)]), float(kys[q % len(ys)]))
        return best, best_d2

    # --- greedy placement of a set of macros --------------------------------------------
    def place_greedy(self, order, x, y, still, tx, ty):
        """Place macros ``order`` (indices into M) one by one at their nearest free spot to
        ``(tx, ty)``, avoiding blockages, obstacles, the macros marked ``still`` (kept at x, y)
        and those placed before.  Returns ``(x, y, failed_index_or_None)`` (new arrays)."""
        x, y = x.copy(), y.copy()
        boxes, halos, is_blk = self.obstacles()
        n_fixed = len(boxes)
        still_idx = np.flatnonzero(still)
        cap = n_fixed + len(still_idx) + len(order)
        obs = np.empty((cap, 4))
        oh = np.zeros((cap, 4))
        blk = np.zeros(cap, bool)
        obs[:n_fixed], oh[:n_fixed], blk[:n_fixed] = boxes, halos, is_blk
        k = n_fixed
        hl = np.stack([self.l, self.b, self.r, self.t], axis=1)
        if len(still_idx):
            obs[k:k + len(still_idx)] = self.foot_boxes(x[still_idx], y[still_idx], still_idx)
            oh[k:k + len(still_idx)] = hl[still_idx]
            k += len(still_idx)
        for i in order:
            spot = self.nearest_spot(i, tx[i], ty[i], obs[:k], oh[:k], blk[:k])
            if spot is None:
                return x, y, int(i)
            x[i], y[i] = self.gx(spot[0]), self.gy(spot[1])
            obs[k] = self.foot_boxes(x[i:i + 1], y[i:i + 1], slice(i, i + 1))[0]
            oh[k] = hl[i]
            k += 1
        return x, y, None

    # --- LP improvement --------------------------------------------------------------------
    # --- local repair --------------------------------------------------------------------
    def repair(self, x, y, bad, i, j, keep):
        """Move a small set covering every violation to its nearest free spot.

        Returns new ``(x, y)`` or ``(None, None)`` when some macro found no spot."""
        movers = self.cover(bad, i, j, keep)
        still = np.ones(len(x), bool)
        still[movers] = False
        order = movers[np.lexsort((movers, -self.area[movers]))]
        nx_, ny_, failed = self.place_greedy(order, x, y, still, x, y)
        if failed is not None:
            return None, None
        return nx_, ny_

    def cover(self, bad, i, j, keep) -> np.ndarray:
        """Macros that must move: all with own violations plus a greedy vertex cover of the
        remaining overlap edges (macros not in ``keep`` first, then highest degree, then the
        smaller)."""
        chosen = bad.copy()
        live = ~(chosen[i] | chosen[j])
        i, j = i[live], j[live]
        n = len(bad)
        pen = np.zeros(n) if keep is None else keep.astype(float)
        while len(i):
            deg = np.bincount(i, minlength=n) + np.bincount(j, minlength=n)
            cand = np.flatnonzero(deg > 0)
            # not a 'keep' macro if possible, then the most conflicts, the smaller, the later
            k = cand[np.lexsort((-cand, self.area[cand], -deg[cand], pen[cand]))[0]]
            chosen[k] = True
            live = (i != k) & (j != k)
            i, j = i[live], j[live]
        return np.flatnonzero(chosen)
