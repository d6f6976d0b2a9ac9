"""Electrostatic spreading of standard cells: the cells are charges, their density the source
of a Poisson field, and a smooth wirelength plus the field's energy is minimised by Nesterov's
method.  It follows the quadratic placement with look-ahead spreading
(:mod:`~floorwidget.placer.flat`), starts from its result and replaces its last, roughest part:
look-ahead spreading moves cells to wherever capacity is free and loses local structure, while
the field only pushes charge out of crowded bins, so clusters of closely connected cells stay
together but looser.

Filler charges take up the room between the cells and ``spread_density`` × the free area, so
cells settle at that density and no denser (Lu, Chen, Chang, Sha, Huang, Teng, Cheng, ACM
TODAES 20(2), 2015, from memory).  Measured on aes_cipher_top against its own placement
(DEVELOPERS.md, "Spreading by a field"): at 0.6 the congestion p99 went from 1.34× to 1.00× the
design's own with HPWL 1.03× (1.05× before).

Pieces:

* weighted-average wirelength, smooth in every pin coordinate, ``γ`` shrinking with the
  overflow (Hsu, Chang, Balabanov, DAC 2011, from memory);
* density by cloud-in-cell charge assignment on a bin grid; the potential from the Poisson
  equation with Neumann boundaries by a cosine transform (``scipy.fft.dctn``); the force on a
  cell its charge times the field in its bin;
* Nesterov's accelerated gradient (Nesterov, Soviet Math. Doklady 27, 1983) with the step from
  the local Lipschitz estimate ``‖Δv‖ / ‖Δ∇f‖`` and a Jacobi preconditioner (pin count plus
  ``λ`` × charge), no cell moving more than a bin per step;
* the density weight ``λ`` from the ratio of the two gradients' norms, growing 5 % a step;
  stop when the cells' overflow over ``spread_density`` is under :data:`STOP_OVERFLOW` or has
  stalled;
* routability: near the end, the cells in the bins of highest routing demand take more charge
  and the fillers less (:func:`_inflation`), so the field opens up the hot spots.
"""

from __future__ import annotations

import numpy as np
import scipy.fft as sfft
from numba import njit

from ..design import CELL, FENCE, Design, Floorplan, orient_offsets
from ..metrics import bin_grid, congestion_map
from .constraints import partial_capacity_loss
from .netmodel import NetTopology
from .spread import Grid, capacity_map, make_grid
from .stages import TARGET_MARGIN, Progress, obstacles, report

__all__ = ["STOP_OVERFLOW", "field_spread", "usable"]

# The cells' overflow over spread_density at which spreading stops; legalisation takes the
# rest.  At 0.12 the known-optimum instance (10^4, utilisation 1) legalised to 1.59x, at 0.16
# 1.35x, at 0.2 1.30x; aes_cipher_top's congestion p99 0.99x its own at 0.16, 1.01x at 0.2.
STOP_OVERFLOW = 0.16
LAMBDA_GROWTH = 1.05  # the density weight's growth per step
STALL_STEPS = 20  # stop when the overflow has not improved by 2 % in this many steps once
STALL_BELOW = 0.25  # it is under this (above it: five times as many steps)
MAX_STEPS = 1500
INFLATE_BELOW = 0.3  # routability inflation once the overflow is under this ...
INFLATE_GAP = 15  # ... and at most every this many steps
INFLATE_ROUNDS = 3
HOT_SHARE = 0.05  # bins in the top share of routing demand count as hot (see _inflation)


def usable(design: Design, fp: Floorplan, var_mask: np.ndarray) -> bool:
    """Whether the field can spread the objects ``var_mask``: standard cells only (clusters and
    macros keep to look-ahead spreading), no fence in the design and no cell in a guide (those
    keep look-ahead spreading, which holds them)."""
    reg = design.regions
    return (bool(var_mask.any()) and bool((design.kind[var_mask] == CELL).all())
            and not (reg.kind == FENCE).any() and bool((reg.member[var_mask] < 0).all()))


def _grid(design: Design, n: int) -> Grid:
    """About one bin per cell, at most 1024 a side."""
    c = design.core
    side = np.sqrt((c[2] - c[0]) * (c[3] - c[1]) / max(n, 1))
    return make_grid(c, np.ones(1), np.ones(1), bin_size=side)


@njit(cache=True)
def _wa(px: np.ndarray, start: np.ndarray, slot: np.ndarray, gamma: float, w: np.ndarray,
        out: np.ndarray) -> None:
    """Add the weighted-average wirelength gradient along one axis to ``out`` (per object,
    ``slot`` of each pin, -1 for a fixed pin); pins in net order.  One pass per net."""
    ig = 1.0 / gamma
    ea = np.empty(len(px))
    eb = np.empty(len(px))
    for e in range(len(start) - 1):
        s, t = start[e], start[e + 1]
        mx = px[s]
        mn = px[s]
        for k in range(s + 1, t):
            mx = max(mx, px[k])
            mn = min(mn, px[k])
        sa = sb = ta = tb = 0.0
        for k in range(s, t):
            a = np.exp((px[k] - mx) * ig)
            b = np.exp((mn - px[k]) * ig)
            ea[k] = a
            eb[k] = b
            sa += a
            sb += b
            ta += px[k] * a
            tb += px[k] * b
        wp = ta / sa
        wm = tb / sb
        for k in range(s, t):
            j = slot[k]
            if j >= 0:
                out[j] += w[e] * (ea[k] / sa * (1.0 + (px[k] - wp) * ig)
                                  - eb[k] / sb * (1.0 - (px[k] - wm) * ig))


@njit(cache=True)
def _cic(x, y, q, xlo, ylo, bw, bh, nx, ny, rho) -> None:
    """Cloud-in-cell: add each charge to the four nearest bin centres of ``rho``."""
    for k in range(len(x)):
        fx = (x[k] - xlo) / bw - 0.5
        fy = (y[k] - ylo) / bh - 0.5
        i0 = int(np.floor(fx))
        j0 = int(np.floor(fy))
        tx = fx - i0
        ty = fy - j0
        for di in range(2):
            i = min(max(i0 + di, 0), nx - 1)
            wx = tx if di else 1.0 - tx
            for dj in range(2):
                j = min(max(j0 + dj, 0), ny - 1)
                wy = ty if dj else 1.0 - ty
                rho[i, j] += q[k] * wx * wy


class _Field:
    """The bin grid, its fixed charge and the Poisson solve."""

    def __init__(self, design: Design, fp: Floorplan, var_mask: np.ndarray, n: int):
        self.design = design
        self.g = g = _grid(design, n)
        fixed = np.ones(design.num_blocks, bool)
        fixed[var_mask] = False
        self.obs = obstacles(design, fp, fixed)
        u = np.pi * np.arange(g.nx) / (g.nx * g.bw)
        v = np.pi * np.arange(g.ny) / (g.ny * g.bh)
        self.k2 = u[:, None] ** 2 + v[None, :] ** 2
        self.k2[0, 0] = 1.0

    def capacity(self, density: float) -> np.ndarray:
        """Room per bin for the moving cells at ``density`` (obstacles and partial blockages
        taken off)."""
        g = self.g
        return np.maximum(capacity_map(g, density, self.obs)
                          - partial_capacity_loss(self.design, g, density), 0.0)

    def settle(self, density: float) -> None:
        """Set the density every bin settles at: what obstacles take of a bin's capacity at
        that density is fixed charge (a partial blockage of cap m: density − m of its area)."""
        self.cap = self.capacity(density)
        self.fixed = density * self.g.bin_area - self.cap

    def charge(self, x: np.ndarray, y: np.ndarray, q: np.ndarray) -> np.ndarray:
        """Cloud-in-cell: each charge shared among the four nearest bin centres."""
        g = self.g
        rho = np.zeros((g.nx, g.ny))
        _cic(x, y, q, g.xlo, g.ylo, g.bw, g.bh, g.nx, g.ny, rho)
        return rho

    def force(self, rho: np.ndarray, x: np.ndarray, y: np.ndarray, q: np.ndarray):
        """Charge times the field at each charge's bin, from ``∇²ψ = −ρ`` (Neumann)."""
        g = self.g
        a = sfft.dctn((rho + self.fixed) / g.bin_area, type=2, norm="ortho") / self.k2
        a[0, 0] = 0.0
        psi = sfft.idctn(a, type=2, norm="ortho")
        ex = -np.gradient(psi, g.bw, axis=0) if g.nx > 1 else np.zeros_like(psi)
        ey = -np.gradient(psi, g.bh, axis=1) if g.ny > 1 else np.zeros_like(psi)
        i = np.clip(((x - g.xlo) / g.bw).astype(np.intp), 0, g.nx - 1)
        j = np.clip(((y - g.ylo) / g.bh).astype(np.intp), 0, g.ny - 1)
        return -q * ex[i, j], -q * ey[i, j]


def _inflation(design: Design, fp: Floorplan, var: np.ndarray, x: np.ndarray, y: np.ndarray,
               target: float) -> np.ndarray:
    """Growth factor of each cell ``var`` at centres ``x, y``: the routing demand over supply
    of its bin (:func:`~floorwidget.metrics.congestion_map`) over the hot level, between 1 and
    1.5.  The hot level is ``target`` or, where the map stays below it, the demand of the
    top :data:`HOT_SHARE` of the bins that hold cells: the placement's own hot spots are
    opened up even where no bin is full, as the report judges the congestion peak."""
    w, h = fp.sizes()
    tmp = fp.copy()
    tmp.x[var] = x - w[var] / 2
    tmp.y[var] = y - h[var] / 2
    grid = bin_grid(design)
    cmap = congestion_map(design, tmp, grid)
    i, j = grid.locate(x, y)
    occupied = np.unique(i * grid.ny + j)
    level = min(target, float(np.quantile(cmap.ravel()[occupied], 1.0 - HOT_SHARE)))
    return np.clip(cmap[i, j] / max(level, 1e-12), 1.0, 1.5)


def _with_fillers(core, fld: _Field, w, h, cx, cy, seed: int):
    """The cells' centres and charges followed by the fillers': filler charges make up the
    room between the cells and the settle density × the free area, each the size of a middle
    cell (at least a quarter bin), dropped at random by free room.  Returns ``x, y, q``, the
    bounds ``(lo_x, hi_x, lo_y, hi_y)`` that keep each inside the core, the filler area and
    count."""
    g = fld.g
    q_cells = w * h
    nm = len(q_cells)
    mid = np.sort(q_cells)[int(0.1 * nm):max(int(0.9 * nm), int(0.1 * nm) + 1)]
    f_area = max(float(mid.mean()), 0.25 * g.bin_area)  # (small fillers: many, no better)
    nf = int(max(0.0, float(fld.cap.sum()) - float(q_cells.sum())) / f_area)
    rng = np.random.default_rng(seed)
    free_p = fld.cap.ravel() / max(float(fld.cap.sum()), 1e-300)
    fb = rng.choice(g.nx * g.ny, size=nf, p=free_p) if nf else np.zeros(0, np.intp)
    x = np.concatenate([cx, g.xlo + (fb // g.ny + rng.random(nf)) * g.bw])
    y = np.concatenate([cy, g.ylo + (fb % g.ny + rng.random(nf)) * g.bh])
    q = np.concatenate([q_cells, np.full(nf, f_area)])
    fs = np.sqrt(f_area)
    c = core
    lo_x = np.concatenate([c[0] + w / 2, np.full(nf, c[0] + fs / 2)])
    hi_x = np.maximum(np.concatenate([c[2] - w / 2, np.full(nf, c[2] - fs / 2)]), lo_x)
    lo_y = np.concatenate([c[1] + h / 2, np.full(nf, c[1] + fs / 2)])
    hi_y = np.maximum(np.concatenate([c[3] - h / 2, np.full(nf, c[3] - fs / 2)]), lo_y)
    return x, y, q, (lo_x, hi_x, lo_y, hi_y), f_area, nf


def _grow(infl: np.ndarray, most: float, q: np.ndarray, q_cells: np.ndarray, room: float,
          f_area: float) -> np.ndarray:
    """Inflation factors ``infl`` capped at ``most`` and at what fits ``0.97 × room`` (the
    extra shrunk in proportion); the cells' charges in ``q`` grow by them and the fillers'
    (the rest of ``q``) shrink so that the total stays ``room``.  Returns the factors."""
    nm = len(q_cells)
    infl = np.minimum(infl, most)
    extra = float(np.sum(q_cells * (infl - 1.0)))
    spare = 0.97 * room - float(q_cells.sum())
    if extra > spare:  # the inflated area must fit
        infl = 1.0 + (infl - 1.0) * max(spare, 0.0) / max(extra, 1e-300)
    q[:nm] = q_cells * infl
    nf = len(q) - nm
    q[nm:] = f_area * max(room - float(q[:nm].sum()), 0.0) / max(nf * f_area, 1e-300)
    return infl


def _pin_model(design: Design, fp: Floorplan, var_mask: np.ndarray, multiplier, nf: int):
    """The nets of the moving cells for the wirelength: their topology, the raw net weights,
    the moving object of each pin (-1 for a fixed pin), a function giving every pin's position
    from the objects' centres, and each object's pin count (fillers: none)."""
    var = np.flatnonzero(var_mask)
    nm = len(var)
    cx, cy = fp.centres()
    topo = NetTopology.from_design(design, multiplier, only=var_mask)
    deg = np.diff(topo.start)
    wnet = topo.weight * (deg - 1) / 2.0  # the raw net weight (times the multiplier)
    slot = np.full(design.num_blocks, -1)
    slot[var] = np.arange(nm)
    pv = slot[topo.block]
    on = pv >= 0
    ox, oy = orient_offsets(design.pin_dx[topo.pin], design.pin_dy[topo.pin],
                            fp.orient[topo.block])
    base_x = np.where(on, 0.0, cx[topo.block]) + ox
    base_y = np.where(on, 0.0, cy[topo.block]) + oy
    pvo = pv[on]
    npins = np.concatenate([np.bincount(pvo, minlength=nm).astype(np.float64), np.zeros(nf)])

    def pins(x, y):
        px, py = base_x.copy(), base_y.copy()
        px[on] += x[pvo]
        py[on] += y[pvo]
        return px, py

    return topo, wnet, pv, pins, npins


def field_spread(design: Design, fp: Floorplan, var_mask: np.ndarray, density: float,
                 multiplier=1.0, progress: Progress = None, stage: str = "field",
                 seed: int = 0, inflate: tuple[float, float] | None = None) -> dict:
    """Spread the cells ``var_mask`` of ``fp`` (changed in place) by the field, everything else
    fixed where it is; returns facts (steps, overflow, fillers).

    Parameters
    ----------
    design, fp : the design and a floorplan whose cells are already roughly spread.
    var_mask : (n,) bool, the cells to move (see :func:`usable`).
    density : float
        The density the cells settle at (``spread_density``), 0 < density ≤ 1; a design
        fuller than that settles at its utilisation plus ``TARGET_MARGIN``.
    multiplier : net weight multipliers (``net_weight_scale``).
    inflate : (congestion_target, max_inflation), optional
        Routability-driven spreading: once the overflow is under :data:`INFLATE_BELOW`, up to
        :data:`INFLATE_ROUNDS` times the cells in hot bins (:func:`_inflation`) take more
        charge, up to ``max_inflation`` times their area, and the fillers give up as much
        (cell inflation from routing demand: Kim, Hu, Lee, Markov, ICCAD 2011; Hsu, Chou,
        Lin, Chang, ICCAD 2011; from memory).
    """
    var = np.flatnonzero(var_mask)
    nm = len(var)
    w, h = fp.sizes()
    cx, cy = fp.centres()
    q_cells = w[var] * h[var]
    mov_area = float(q_cells.sum())
    fld = _Field(design, fp, var_mask, nm)
    full = float(fld.capacity(1.0).sum())  # a fuller design settles at its fill
    density = max(density, min(1.0, mov_area / max(full, 1e-300) + TARGET_MARGIN))
    fld.settle(density)
    g = fld.g
    x, y, q, (lo_x, hi_x, lo_y, hi_y), f_area, nf = _with_fillers(
        design.core, fld, w[var], h[var], cx[var], cy[var], seed)

    topo, wnet, pv, pins, npins = _pin_model(design, fp, var_mask, multiplier, nf)

    def overflow(x, y) -> float:
        rho = fld.charge(x[:nm], y[:nm], q[:nm])
        return float(np.maximum(rho - fld.cap, 0.0).sum() / mov_area) if mov_area else 0.0

    def gamma(ov: float) -> float:  # 80 bins wide at overflow 1, 0.8 at 0.1
        return 8.0 * g.bw * 10.0 ** (20.0 / 9.0 * (min(ov, 1.0) - 0.1) - 1.0)

    def gradients(x, y, ov):
        px, py = pins(x, y)
        gw = gamma(ov)
        gx = np.zeros(nm + nf)
        gy = np.zeros(nm + nf)
        _wa(px, topo.start, pv, gw, wnet, gx)
        _wa(py, topo.start, pv, gw, wnet, gy)
        dx, dy = fld.force(fld.charge(x, y, q), x, y, q)
        return gx, gy, dx, dy

    ov = overflow(x, y)
    gx, gy, dx, dy = gradients(x, y, ov)
    lam = float(np.abs(gx).sum() + np.abs(gy).sum()) / \
        max(float(np.abs(dx).sum() + np.abs(dy).sum()), 1e-300)
    qn = q / g.bin_area

    def direction(gx, gy, dx, dy, lam):
        pre = np.maximum(npins + lam * qn, 1.0)
        return (gx + lam * dx) / pre, (gy + lam * dy) / pre

    u = (x.copy(), y.copy())
    v = (x.copy(), y.copy())
    a = 1.0
    d = direction(gx, gy, dx, dy, lam)
    prev = None
    step = 0.1 * g.bw
    best, since, it = np.inf, 0, 0
    infl = np.ones(nm)
    rounds, last = 0, 0
    room = float(fld.cap.sum())
    for it in range(1, MAX_STEPS + 1):
        if prev is not None:
            dv = np.hypot(np.linalg.norm(v[0] - prev[0][0]), np.linalg.norm(v[1] - prev[0][1]))
            dg = np.hypot(np.linalg.norm(d[0] - prev[1][0]), np.linalg.norm(d[1] - prev[1][1]))
            if dg > 0:
                step = dv / dg
        un = (np.clip(v[0] - np.clip(step * d[0], -g.bw, g.bw), lo_x, hi_x),
              np.clip(v[1] - np.clip(step * d[1], -g.bh, g.bh), lo_y, hi_y))
        an = (1.0 + np.sqrt(4.0 * a * a + 1.0)) / 2.0
        k = (a - 1.0) / an
        vn = (np.clip(un[0] + k * (un[0] - u[0]), lo_x, hi_x),
              np.clip(un[1] + k * (un[1] - u[1]), lo_y, hi_y))
        prev = (v, d)
        u, v, a = un, vn, an
        ov = overflow(*u)
        if (inflate is not None and inflate[1] > 1.0 and rounds < INFLATE_ROUNDS
                and ov < INFLATE_BELOW and it - last >= INFLATE_GAP):
            infl = _grow(infl * _inflation(design, fp, var, u[0][:nm], u[1][:nm], inflate[0]),
                         inflate[1], q, q_cells, room, f_area)
            mov_area = float(q[:nm].sum())
            qn = q / g.bin_area
            rounds, last, best, since = rounds + 1, it, np.inf, 0
            ov = overflow(*u)
        if ov < STOP_OVERFLOW:
            break
        if ov < best * 0.98:
            best, since = ov, 0
        else:
            since += 1
            if since >= (STALL_STEPS if ov < STALL_BELOW else 5 * STALL_STEPS):
                break
        if it % 10 == 0:
            report(progress, stage, min(1.0, it / 300), {"iteration": it, "overflow": ov})
        lam *= LAMBDA_GROWTH
        d = direction(*gradients(v[0], v[1], ov), lam)
    fp.x[var] = u[0][:nm] - w[var] / 2
    fp.y[var] = u[1][:nm] - h[var] / 2
    return {"iterations": it, "overflow": ov, "fillers": nf, "bins": (g.nx, g.ny),
            "density": density, "inflation_rounds": rounds,
            "inflated": float(np.sum(q_cells * (infl - 1.0)) / max(q_cells.sum(), 1e-300))}
