"""Macro legalisation: from a global placement to an overlap-free, on-grid macro placement.

What "legal" means here (the contract checked by ``tests/test_legalize.py``):

* the **halo rule** (common practice): a halo is a keep-out around one macro, for standard
  cells and for the *footprints* of other macros, and halos may overlap each other.  So the
  footprint of a macro this function is responsible for has no overlap of positive area with
  the *halo box* (footprint grown by the halo, left/bottom/right/top) of any other macro, and
  no other macro's footprint overlaps its halo box (touching is allowed).  Facing footprints
  are kept apart by the larger of the two facing halos (along x or along y), which implies
  the rule;
* a macro's **footprint** lies inside the core (the bounding box of the rows); its halo may hang
  over the core edge into the die margin but never beyond the die;
* a macro's footprint has no overlap of positive area with a placement blockage (a halo may
  cover a blockage: both only keep standard cells out);
* its lower-left corner lies on the placement grid ``grid_origin + k * grid_pitch``.

Every comparison is made in floating point on exactly the coordinates
:meth:`Floorplan.rects` produces (``x - left``, ``(x + w) + right``), so an outside check with
those rectangles (e.g. shapely's intersection area) sees exactly zero overlap.

Method
------
1. *Checks.*  Pinned/fixed macros overlapping each other raise :class:`PlacementError` at once;
   a macro that does not fit in the core in its orientation, and more macro area than free core
   area, raise before a full pass.  The input floorplan is never written to.
2. *Early exit.*  An already-legal placement is returned unchanged (bit-exact).
3. *Local repair* (the common case after a hand move).  The macros in conflict are reduced to a
   small set that must move (every macro with a violation of its own, plus a greedy vertex cover
   of the overlap graph avoiding ``keep`` and preferring small macros); only those are moved,
   each to its nearest free grid spot with all others held still.
4. *Full legalisation.*  An ordered nearest-free-spot search: macros by decreasing halo area,
   each moved to the grid point nearest (Euclidean) to its global-placement position that is free
   of everything placed before it, of pinned/fixed macros and of blockages.  The candidate
   spots are the Cartesian product of the snapped target, the bounds and the grid lines just
   clear of each obstacle (the edges of its configuration-space rectangle), which contains the
   nearest free point (moving a coordinate towards the target is blocked only by an obstacle
   edge or a bound); the search runs over a window that grows until the nearest free candidate
   lies inside it.  Largest-first greedy legalisation in the spirit of Hill's "Tetris"
   legaliser (D. Hill, US patent 6,370,673, 2002, from memory), with the exact nearest free spot
   in place of a row scan.
5. *LP improvement.*  Keeping the relative order found (for every pair of macros that could
   meet within a trust region, the horizontal or vertical separation they already satisfy,
   choosing the one least binding at the targets), minimise the total L1 displacement from the
   global placement with ``scipy.optimize.linprog(method="highs")``: two independent LPs over the
   horizontal and vertical constraint graphs, as in constraint-graph layout compaction (Liao,
   Wong, IEEE TCAD 2(2), 1983) and the white-space redistribution LP of Tang, Tian, Wong,
   ASP-DAC 2005 (both from memory).  The variables are *grid indices*: every separation and
   bound is rounded to a whole number of pitches in the safe direction and the targets to the
   grid, so the data are integral (an L1 problem over difference constraints, the dual of a
   min-cost flow, has integral optima); the solution is rounded anyway and checked exactly.
   Where two halo boxes end up abutting exactly, floating point can leave an overlap of a few
   ulps; such a macro is moved by those few ulps (it stays on the grid within far less than the
   1e-6 µm grid tolerance) and anything else left goes through the local repair.  A round is
   accepted only when it lowers the displacement.  Pairs farther apart than twice the trust
   radius cannot meet, so the trust region keeps each round's constraint set sparse and exact.

6. *Complete fallback.*  When the greedy search fails (retried with the failing macro first),
   a sequence pair taken from the input positions (Murata, Fujiyoshi, Nakatake, Kajitani,
   ICCAD 1995) is annealed to a legal fixed-outline packing, obstacles (pinned and fixed
   macros, blockages) taking part in the pair at their fixed places (:class:`_Packer`; the
   annealing and its slack-driven move follow Adya, Markov, IEEE TVLSI 2003; the packing is
   the longest-path evaluation of the constraint graphs: in O(n log n) by prefix maxima as in
   the LCS evaluation of Tang, Tian, Wong, DATE 2000, when the separations depend on one macro
   only (no halos, or equal ones), else in O(n²) with the pairwise halo separations).  The
   annealing is compiled with numba.  The moves are local
   and the cost carries a fading wirelength term (the HPWL of the nets touching the macros;
   their displacement when there are no nets), so the packing keeps the input's relative
   order where it can; a short annealing among legal packings then lowers that term.  One LP
   per axis over all relations of the pair minimises the displacement, and step 5 follows.

Notes
-----
Macro packing is NP-hard.  :class:`PlacementError` says which case it is: *impossible by
area* (more footprint area than free core), *impossible* (a macro fits nowhere even with no
other movable macro placed: a proof), or *search budget spent* (the sequence-pair search ran
out of moves; the input may still be feasible).
Orientation is kept: :func:`floorwidget.placer.orient.choose_orientations` chooses it.
The result is an early-floorplanning estimate; sign-off belongs to the full implementation flow.
"""

from __future__ import annotations

import time
from collections.abc import Callable, Iterable

import numpy as np
from numba import njit
from scipy import sparse
from scipy.optimize import linprog

from ..design import MACRO, MOVABLE, Design, Floorplan, off_grid, orient_offsets
from ._select import movable_macros
from .constraints import macro_keepouts
from .errors import PlacementError

__all__ = ["legalize_macros", "is_legal"]

_EPS = 1e-9  # tolerance in grid units when turning a distance into a number of pitches
_GRID_TOL = 1e-6  # µm, as in design.off_grid
_EVAL_CELLS = 1 << 18  # candidate x obstacle comparisons per numpy chunk
_T0 = 0.3  # initial annealing temperature, in median macro sides
_DISP_WEIGHT = 0.3  # weight of the quality term (as this much displacement), halved each run
_RUN_PER_MACRO = 5000  # most annealing moves per macro in one run (at most half the budget)
_SWAP_WINDOW = 0.01  # swap partners at most this fraction of the macros apart in a sequence
_POLISH_PER_MACRO = 200  # annealing moves per macro among legal packings, for the quality term
_SPREAD_MAX = 800  # most macros for the LP over every relation of the sequence pair


# ---------------------------------------------------------------------------------------------
# geometry helpers (all strict: touching rectangles do not overlap)


def _pairs(a: np.ndarray, b: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Index pairs of rectangles with positive-area overlap (``i < j`` when ``b`` is None).

    Sort-and-sweep along x: rows are taken in chunks in order of ``xlo``; a chunk is compared
    only with the columns whose ``xlo`` lies in ``(min xlo - widest column, max xhi)``."""
    same = b is None
    if same:
        b = a
    n, m = len(a), len(b)
    if n == 0 or m == 0:
        return np.zeros(0, np.intp), np.zeros(0, np.intp)
    out_i, out_j = [], []
    order_b = np.argsort(b[:, 0], kind="stable")
    bs = b[order_b]
    widest = float((b[:, 2] - b[:, 0]).max())
    order_a = np.argsort(a[:, 0], kind="stable")
    as_ = a[order_a]
    step = 256
    for s in range(0, n, step):
        aa = as_[s:s + step]
        lo = np.searchsorted(bs[:, 0], aa[0, 0] - widest, side="left")
        hi = np.searchsorted(bs[:, 0], aa[:, 2].max(), side="left")
        if hi <= lo:
            continue
        cols = bs[lo:hi]
        m_ = ((aa[:, None, 0] < cols[None, :, 2]) & (cols[None, :, 0] < aa[:, None, 2])
              & (aa[:, None, 1] < cols[None, :, 3]) & (cols[None, :, 1] < aa[:, None, 3]))
        i, j = np.nonzero(m_)
        i = order_a[i + s]
        j = order_b[j + lo]
        if same:
            keep = i < j
            i, j = i[keep], j[keep]
        out_i.append(i)
        out_j.append(j)
    if not out_i:
        return np.zeros(0, np.intp), np.zeros(0, np.intp)
    i, j = np.concatenate(out_i), np.concatenate(out_j)
    o = np.lexsort((j, i))  # deterministic order, independent of the sweep
    return i[o], j[o]


def _grow(boxes: np.ndarray, halo: np.ndarray) -> np.ndarray:
    """Halo boxes: ``boxes`` grown by ``halo`` (left, bottom, right, top), as Floorplan.rects."""
    return np.stack([boxes[:, 0] - halo[:, 0], boxes[:, 1] - halo[:, 1],
                     boxes[:, 2] + halo[:, 2], boxes[:, 3] + halo[:, 3]], axis=1)


def _conflicts(foot: np.ndarray, halo_box: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Pairs ``i < j`` in conflict under the halo rule: the footprint of one overlaps the halo
    box of the other (halo boxes may overlap each other)."""
    i, j = _pairs(foot, halo_box)
    keep = i != j
    i, j = i[keep], j[keep]
    lo, hi = np.minimum(i, j), np.maximum(i, j)
    if not len(lo):
        return lo, hi
    m = int(hi.max()) + 1
    key = np.unique(lo * m + hi)
    return key // m, key % m


def _union_area(rects: np.ndarray, clip: np.ndarray) -> float:
    """Area of the union of ``rects`` clipped to ``clip`` (coordinate compression).

    Exact up to ~1500 rectangles; beyond that a lower bound (the largest single clipped area),
    which keeps the capacity check a necessary condition.
    """
    r = rects.copy()
    r[:, 0] = np.maximum(r[:, 0], clip[0])
    r[:, 1] = np.maximum(r[:, 1], clip[1])
    r[:, 2] = np.minimum(r[:, 2], clip[2])
    r[:, 3] = np.minimum(r[:, 3], clip[3])
    r = r[(r[:, 2] > r[:, 0]) & (r[:, 3] > r[:, 1])]
    if not len(r):
        return 0.0
    if len(r) > 1500:
        return float(((r[:, 2] - r[:, 0]) * (r[:, 3] - r[:, 1])).max())
    xs = np.unique(r[:, [0, 2]])
    ys = np.unique(r[:, [1, 3]])
    diff = np.zeros((len(xs) + 1, len(ys) + 1), np.int32)
    i0 = np.searchsorted(xs, r[:, 0])
    i1 = np.searchsorted(xs, r[:, 2])
    j0 = np.searchsorted(ys, r[:, 1])
    j1 = np.searchsorted(ys, r[:, 3])
    np.add.at(diff, (i0, j0), 1)
    np.add.at(diff, (i1, j0), -1)
    np.add.at(diff, (i0, j1), -1)
    np.add.at(diff, (i1, j1), 1)
    cover = diff.cumsum(0).cumsum(1)[:-2, :-2] > 0
    return float((np.diff(xs)[:, None] * np.diff(ys)[None, :])[cover].sum())


# ---------------------------------------------------------------------------------------------
# the problem: movable macros (the set M) against obstacles


class _Problem:
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
            i, _ = _pairs(fb, self.blk)
            bad[i] = True
        if len(self.obst):
            i, _ = _pairs(fb, _grow(self.obst, self.obst_halo))
            bad[i] = True
            i, _ = _pairs(hb, self.obst)
            bad[i] = True
        i, j = _conflicts(fb, hb)
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
            i, j = _pairs(fb, hb)  # footprint i against halo box j
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
        i, j = _pairs(hb + grow)
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
            a, o = _pairs(hb + grow, _grow(boxes, halos))
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


# ---------------------------------------------------------------------------------------------
# public API




def _check_obstacles(design: Design, fp: Floorplan) -> None:
    stay = np.flatnonzero((design.kind == MACRO) & (fp.status != MOVABLE))
    if len(stay) < 2:
        return
    i, j = _conflicts(fp.rects()[stay], fp.rects(halo=True)[stay])
    if len(i):
        a, b = stay[i[0]], stay[j[0]]
        st = ("movable", "pinned", "fixed")
        more = f" (and {len(i) - 1} more pair(s))" if len(i) > 1 else ""
        raise PlacementError(
            f"{st[fp.status[a]]} macro {design.names[a]!r} and {st[fp.status[b]]} macro "
            f"{design.names[b]!r} overlap (a footprint inside the other's halo box){more}; "
            "move or unpin one of them")


def _check_capacity(prob: _Problem) -> None:
    names = prob.design.names
    bad = (prob.kx0 > prob.kx1) | (prob.ky0 > prob.ky1)
    if bad.any():
        i = int(np.flatnonzero(bad)[0])
        raise PlacementError(
            f"macro {names[prob.idx[i]]!r} ({prob.w[i]:g} x {prob.h[i]:g} µm in its orientation) "
            f"does not fit inside the core {prob.core.tolist()} on the placement grid")
    c = prob.core
    core_area = (c[2] - c[0]) * (c[3] - c[1])
    blocked = np.concatenate([prob.blk, _grow(prob.obst, prob.obst_halo)])
    free = core_area - _union_area(blocked, c)
    need = float((prob.w * prob.h).sum())
    if need > free * (1 + 1e-12):
        raise PlacementError(
            f"impossible by area: movable macros need {need:.6g} µm² but only {free:.6g} µm² "
            "of the core is free of blockages and of other macros with their halos")


def is_legal(design: Design, fp: Floorplan, macros=None) -> bool:
    """Whether the movable macros (or the subset ``macros``) of ``fp`` are legal in the sense
    of this module (the halo rule, footprint in core, halo in die, off blockages, on grid).
    """
    move = movable_macros(design, fp, macros)
    prob = _Problem(design, fp, move)
    bad, i, _ = prob.violations(prob.x0, prob.y0)
    return not bad.any() and not len(i)


def legalize_macros(design: Design, fp: Floorplan, *, macros: Iterable | None = None,
                    keep: Iterable | None = None, local: bool | None = None, lp: bool = True,
                    lp_rounds: int = 3, trust: float | None = None, retries: int = 3,
                    pack_moves: int | None = None,
                    progress: Callable[[str, float, dict], None] | None = None,
                    **options) -> Floorplan:
    """Legalise the movable macros of ``fp`` with minimum displacement; return a new floorplan.

    Parameters
    ----------
    design : Design
    fp : Floorplan
        Input (e.g. global-placement) positions and orientations; never modified.
    macros : names, indices or mask, optional
        Legalise only these (movable macros among them; pinned or fixed ones in the list are
        ignored).  Every other macro is an obstacle; obstacles that are movable are not checked
        against each other.
    keep : names, indices or mask, optional
        Macros to move only when nothing else resolves a conflict (e.g. the one just dragged).
    local : bool, optional
        Force (True) or forbid (False) the local repair; by default it is tried when the macros
        that must move are at most a quarter of them (or at most 3).  When it finds no spot for
        one of them, the full pass runs.
    lp : bool
        Improve the greedy result with the minimum-displacement LP.
    lp_rounds : int
        Maximum LP rounds (each re-derives the constraint graphs from the current order).
    trust : float, optional
        Trust radius in µm for one LP round (default: the median macro side).
    retries : int
        Greedy restarts with a macro that found no spot moved to the front of the order.
    pack_moves : int, optional
        Budget of the sequence-pair search that runs when the greedy search fails (default
        about 3e10 / n² moves for n macros, at most 10,000,000).
    progress : callable, optional
        ``progress(stage, fraction, info)``.
    **options
        ``seed`` seeds the sequence-pair search (the result is deterministic for a seed);
        ``target_density`` is accepted and ignored; anything else is a ``TypeError``.

    Returns
    -------
    Floorplan
        A copy with new ``x``, ``y`` for the macros that moved; ``info`` gains
        ``legalize_mode`` ("unchanged", "local" or "full"), ``legalize_moved``,
        ``legalize_displacement`` (total L1, µm), ``legalize_max_displacement`` (µm),
        ``legalize_lp_rounds`` and ``legalize_seconds``.

    Raises
    ------
    PlacementError
        Pinned/fixed macros in conflict with each other (the pair is named), a macro that
        does not fit in the core, "impossible by area" (more macro area than free core area),
        "impossible" (a macro fits nowhere among the obstacles alone), or "search budget
        spent" (the sequence-pair search found no legal packing in ``pack_moves``; not a
        proof).  The input floorplan is untouched.

    Examples
    --------
    >>> import floorwidget as fw                                    # doctest: +SKIP
    >>> d = fw.load("demo_data/heron_dsp.json")                     # doctest: +SKIP
    >>> legal = legalize_macros(d, d.initial)                       # doctest: +SKIP
    >>> is_legal(d, legal)                                          # doctest: +SKIP
    True

    References
    ----------
    D. Hill, US patent 6,370,673, 2002 (greedy "Tetris" legalisation, from memory).
    Y.-Z. Liao, C.-K. Wong, IEEE TCAD 2(2), 1983 (constraint-graph compaction, from memory).
    X. Tang, R. Tian, M. D. F. Wong, ASP-DAC 2005 (constraint-graph LP for white-space
    redistribution, from memory).
    """
    unknown = set(options) - {"seed", "target_density"}
    if unknown:
        raise TypeError(f"legalize_macros() got unexpected option(s): {', '.join(sorted(unknown))}")
    t0 = time.perf_counter()
    report = progress or (lambda *a: None)
    move = movable_macros(design, fp, macros)
    _check_obstacles(design, fp)
    prob = _Problem(design, fp, move)
    n = len(prob.idx)
    keep_m = None
    if keep is not None:
        keep_m = movable_macros(design, fp, keep)[prob.idx]
    out = fp.copy()
    info = {"legalize_mode": "unchanged", "legalize_moved": 0, "legalize_displacement": 0.0,
            "legalize_max_displacement": 0.0, "legalize_lp_rounds": 0}
    if n:
        x, y = prob.x0, prob.y0
        bad, i, j = prob.violations(x, y)
        if bad.any() or len(i):
            report("legalize", 0.0, {"conflicts": int(bad.sum() + len(i))})
            nx_ = None
            movers = prob.cover(bad, i, j, keep_m)
            try_local = local if local is not None else len(movers) <= max(3, n // 4)
            if try_local:
                nx_, ny_ = prob.repair(x, y, bad, i, j, keep_m)
                if nx_ is not None:
                    info["legalize_mode"] = "local"
            if nx_ is None:
                _check_capacity(prob)  # (a legal or locally repaired placement proves room)
                nx_, ny_ = _full(prob, retries, report, pack_moves,
                                 int(options.get("seed", 0) or 0))
                info["legalize_mode"] = "full"
                if lp:
                    report("legalize", 0.6, {"stage": "lp"})
                    nx_, ny_, rounds = prob.lp_improve(nx_, ny_, lp_rounds, trust)
                    info["legalize_lp_rounds"] = rounds
            bad, i, j = prob.violations(nx_, ny_)
            if bad.any() or len(i):  # not expected by construction: one more repair, then fail
                nx_, ny_ = prob.nudge(nx_, ny_)
                bad, i, j = prob.violations(nx_, ny_)
                if bad.any() or len(i):
                    rx, ry = prob.repair(nx_, ny_, bad, i, j, keep_m)
                    if rx is not None:
                        nx_, ny_ = rx, ry
                        bad, i, j = prob.violations(nx_, ny_)
            if bad.any() or len(i):  # never return an illegal placement
                k = int(np.flatnonzero(bad)[0]) if bad.any() else int(i[0])
                raise PlacementError(f"macro {design.names[prob.idx[k]]!r} could not be "
                                     "legalised (internal check failed)")
            out.x[prob.idx] = nx_
            out.y[prob.idx] = ny_
            dx = np.abs(nx_ - prob.x0) + np.abs(ny_ - prob.y0)
            info["legalize_moved"] = int(((nx_ != prob.x0) | (ny_ != prob.y0)).sum())
            info["legalize_displacement"] = float(dx.sum())
            info["legalize_max_displacement"] = float(dx.max())
    info["legalize_seconds"] = time.perf_counter() - t0
    out.info.update(info)
    report("legalize", 1.0, dict(info))
    return out


def _full(prob: _Problem, retries: int, report, pack_moves: int | None,
          seed: int) -> tuple[np.ndarray, np.ndarray]:
    n = len(prob.idx)
    order = np.lexsort((np.arange(n), -prob.area))
    still = np.zeros(n, bool)
    for attempt in range(retries + 1):
        x, y, failed = prob.place_greedy(order, prob.x0, prob.y0, still, prob.x0, prob.y0)
        if failed is None:
            return x, y
        if failed == order[0]:  # placed first, it met only the obstacles: a proof
            raise PlacementError(
                f"impossible: macro {prob.design.names[prob.idx[failed]]!r} ({prob.w[failed]:g} "
                f"x {prob.h[failed]:g} µm plus halo) fits nowhere in the core among the "
                "blockages and pinned or fixed macros; free some room or enlarge the core")
        report("legalize", 0.3, {"retry": attempt + 1, "failed": prob.design.names[
            prob.idx[failed]]})
        order = np.concatenate([[failed], order[order != failed]])
    # the greedy search is incomplete: pack from a sequence pair instead
    packer = _Packer(prob)
    moves = packer.budget() if pack_moves is None else int(pack_moves)
    found = packer.search(moves, seed, report)
    if found is None:
        i = failed
        raise PlacementError(
            f"search budget spent: no legal macro placement found in {moves} sequence-pair "
            f"moves after the greedy search failed on macro {prob.design.names[prob.idx[i]]!r} "
            f"({prob.w[i]:g} x {prob.h[i]:g} µm plus halo); the macros fit by area, so this is "
            "not a proof of infeasibility: free some room (unpin macros, shrink halos or "
            "blockages), enlarge the core, or raise pack_moves")
    return prob.gx(found[0]), prob.gy(found[1])


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
        boxes, halos, is_blk = prob.obstacles()
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

    def budget(self) -> int:
        """Default annealing budget: about 4e10 elementary steps (a move costs O(n log n)
        with node weights, O(n²) otherwise, plus the pins of the macros' nets), at most
        10,000,000 moves -- under a minute on one core whatever the number of macros."""
        n = self.n
        steps = (2 * n * np.log2(n + 1) if self.node else n * n) + len(self.nets[1]) \
            + 4 * (n + self.m)
        return int(np.clip(4e10 / steps, 1000, 10_000_000))

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
            vx = 0.0
            vy = 0.0
            for q in range(n):
                vx += max(0.0, kx[q] - hix[q]) * px
                vy += max(0.0, ky[q] - hiy[q]) * py
            on_x = vx >= vy
            # a: a random violating macro along that axis
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
