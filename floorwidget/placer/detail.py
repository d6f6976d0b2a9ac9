"""Detailed placement: global swap and vertical swap in the manner of Pan, Viswanathan, Chu
(ICCAD 2005) on a row-legal placement.

For each cell, its *optimal region* is the median box of the bounding boxes of its nets without
it; the cell is swapped with a cell of the same width in or next to that region (the same row
or the rows toward it) when the swap lowers the HPWL of the nets of both.  Equal widths keep
every cell on its site and the rows overlap-free; a swap is taken only on a strict HPWL gain,
so a pass never raises HPWL.  Adjacent cells of different widths in a row are also swapped (the
pair keeps its span) on a strict gain.  The kernels are sequential by nature and compiled with
numba; every array they take is built with vectorised numpy.

The results are early-floorplanning estimates; sign-off belongs to the implementation flow.

References
----------
M. Pan, N. Viswanathan, C. Chu, ICCAD 2005 (global swap, vertical swap, from memory).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from ..design import ORIENT_CODE, Design, Floorplan, orient_offsets
from ..metrics import bin_grid, hpwl, rect_area_map, row_of
from .constraints import partial_capacity_loss
from .errors import PlacementError
from .rows import cell_mask, row_segments

__all__ = ["detailed_place"]


MAX_SITES = 200_000_000  # site map size above which detailed placement is skipped


def _fill_runs(occ: np.ndarray, start: np.ndarray, length: np.ndarray, value: np.ndarray
               ) -> None:
    """``occ[start[k] : start[k] + length[k]] = value[k]`` for every k, vectorised."""
    length = np.asarray(length, np.int64)
    tot = int(length.sum())
    if not tot:
        return
    rep = np.repeat(np.arange(len(length)), length)
    first = np.cumsum(length) - length
    occ[np.repeat(start, length) + (np.arange(tot) - first[rep])] = np.repeat(value, length)


SMALL_NET = 16  # nets with more pins update their bounding box incrementally when they can


@njit(cache=True)
def _bbox_after(net, N, bx, by, osign, a, ax, ay, asg, b, bxx, byy, bsg):
    """Bounding box ``x0, x1, y0, y1`` of ``net`` once block ``a`` is centred at (ax, ay) with
    y-offset sign ``asg`` and ``b`` at (bxx, byy, bsg) (-1: no such block).

    A large net whose moved pins all lie strictly inside its stored box only grows by their
    new positions (its box cannot shrink); otherwise the box is recomputed from every pin."""
    ns, pb, pdx, pdy, bnet_s, bnets, bpins, bb = N
    if ns[net + 1] - ns[net] > SMALL_NET:
        x0, x1, y0, y1 = bb[net, 0], bb[net, 1], bb[net, 2], bb[net, 3]
        nx0, nx1, ny0, ny1 = x0, x1, y0, y1
        inside = True
        for side in range(2):
            blk = a if side == 0 else b
            if blk < 0:
                continue
            cx = ax if side == 0 else bxx
            cy = ay if side == 0 else byy
            sg = asg if side == 0 else bsg
            for t in range(bnet_s[blk], bnet_s[blk + 1]):
                if bnets[t] != net:
                    continue
                p = bpins[t]
                ox = bx[blk] + pdx[p]
                oy = by[blk] + osign[blk] * pdy[p]
                if not (x0 < ox < x1 and y0 < oy < y1):
                    inside = False
                x = cx + pdx[p]
                y = cy + sg * pdy[p]
                nx0 = min(nx0, x)
                nx1 = max(nx1, x)
                ny0 = min(ny0, y)
                ny1 = max(ny1, y)
        if inside:
            return nx0, nx1, ny0, ny1
    return _scan_box(net, ns, pb, pdx, pdy, bx, by, osign, -1, a, ax, ay, asg, b, bxx, byy,
                     bsg)


@njit(cache=True)
def _scan_box(net, ns, pb, pdx, pdy, bx, by, osign, skip, a, ax, ay, asg, b, bxx, byy, bsg):
    """Bounding box ``x0, x1, y0, y1`` of ``net`` from all its pins, leaving out block
    ``skip`` and with blocks ``a`` and ``b`` at the centres given (-1: none); an empty box has
    ``x0 > x1``."""
    x0 = np.inf
    x1 = -np.inf
    y0 = np.inf
    y1 = -np.inf
    for p in range(ns[net], ns[net + 1]):
        k = pb[p]
        if k == skip:
            continue
        if k == a:
            x = ax + pdx[p]
            y = ay + asg * pdy[p]
        elif k == b:
            x = bxx + pdx[p]
            y = byy + bsg * pdy[p]
        else:
            x = bx[k] + pdx[p]
            y = by[k] + osign[k] * pdy[p]
        x0 = min(x0, x)
        x1 = max(x1, x)
        y0 = min(y0, y)
        y1 = max(y1, y)
    return x0, x1, y0, y1


@njit(cache=True)
def _swap_gain(i, j, nxi, nyi, sgi, nxj, nyj, sgj, N, bx, by, osign, stamp, tick, commit):
    """HPWL before minus after moving i (and j, unless -1) to their new centres, every net
    counted once; with ``commit`` the stored net boxes take their new values."""
    bnet_s, bnets, bb = N[4], N[5], N[7]
    gain = 0.0
    for side in range(2):
        blk = i if side == 0 else j
        if blk < 0:
            continue
        for t in range(bnet_s[blk], bnet_s[blk + 1]):
            net = bnets[t]
            if stamp[net] == tick:
                continue
            stamp[net] = tick
            x0, x1, y0, y1 = _bbox_after(net, N, bx, by, osign, i, nxi, nyi, sgi, j, nxj,
                                         nyj, sgj)
            gain += (bb[net, 1] - bb[net, 0] + bb[net, 3] - bb[net, 2]) - (x1 - x0 + y1 - y0)
            if commit:
                bb[net, 0] = x0
                bb[net, 1] = x1
                bb[net, 2] = y0
                bb[net, 3] = y1
    return gain


@njit(cache=True)
def _median_target(i, N, bx, by, osign, maxdeg, buf_x, buf_y):
    """Centre of the optimal region of block i: the median of the bounding-box ends of its
    nets without it (returns NaN when it has no such net)."""
    ns, pb, pdx, pdy, bnet_s, bnets = N[0], N[1], N[2], N[3], N[4], N[5]
    m = 0
    for t in range(bnet_s[i], bnet_s[i + 1]):
        net = bnets[t]
        if ns[net + 1] - ns[net] > maxdeg:
            continue
        x0, x1, y0, y1 = _scan_box(net, ns, pb, pdx, pdy, bx, by, osign, i, -1, 0.0, 0.0, 1.0,
                                   -1, 0.0, 0.0, 1.0)
        if x0 > x1:
            continue
        buf_x[m] = x0
        buf_y[m] = y0
        buf_x[m + 1] = x1
        buf_y[m + 1] = y1
        m += 2
    if m == 0:
        return np.nan, np.nan
    sx = np.sort(buf_x[:m])
    sy = np.sort(buf_y[:m])
    return 0.5 * (sx[m // 2 - 1] + sx[m // 2]), 0.5 * (sy[m // 2 - 1] + sy[m // 2])


@njit(cache=True)
def _bin(v, lo, bw, n):
    """The density bin of coordinate ``v`` (clamped to the grid)."""
    return min(max(int((v - lo) / bw), 0), n - 1)


@njit(cache=True)
def _fits(D, x0, y0, x1, y1, area):
    """Whether a cell of ``area`` moving from centre ``(x0, y0)`` to ``(x1, y1)`` keeps the
    density bin it enters within its capacity (staying in its own bin always does)."""
    use, cap, dx0, dy0, dbw, dbh = D
    dnx, dny = use.shape
    ki = _bin(x1, dx0, dbw, dnx)
    kj = _bin(y1, dy0, dbh, dny)
    same = ki == _bin(x0, dx0, dbw, dnx) and kj == _bin(y0, dy0, dbh, dny)
    return same or use[ki, kj] + area <= cap[ki, kj]


@njit(cache=True)
def _free_run(occ, base, q, n_sites, i):
    """The run ``[b0, e)`` of free sites (cell ``i``'s own count as free) around site ``q``
    of the row starting at ``base`` in ``occ``."""
    e = q
    while e < n_sites and (occ[base + e] == -1 or occ[base + e] == i):
        e += 1
    b0 = q
    while b0 > 0 and (occ[base + b0 - 1] == -1 or occ[base + b0 - 1] == i):
        b0 -= 1
    return b0, e


@njit(cache=True)
def _global_moves(cells, wsite, bx, by, hgt, osign, row_of_cell, site_of_cell, occ, row_off,
                  r_x0, r_sw, r_y, r_ns, r_sign, rows_by_y, N, maxdeg, passes, nbuf,
                  reach_rows, reach_sites, swap_reach, D):
    """Global moves and swaps: each cell goes to a free run of sites, or swaps with a cell of
    its width, near its optimal region, on the best strict HPWL gain.  ``occ`` maps every
    site of every row to the cell on it (-1 free, -2 blocked).  ``D`` = (usage, capacity,
    x0, y0, bin width, bin height): a move into another density bin must keep that bin within
    its capacity (swaps of equal widths change no bin's usage)."""
    use, cap, dx0, dy0, dbw, dbh = D
    dnx, dny = use.shape
    stamp = np.zeros(len(N[0]) - 1, np.int64)
    tick = 0
    buf_x = np.empty(nbuf)
    buf_y = np.empty(nbuf)
    ys = r_y[rows_by_y]
    nr = len(rows_by_y)
    total = 0.0
    moves = 0
    for _p in range(passes):
        for ci in range(len(cells)):
            i = cells[ci]
            tx, ty = _median_target(i, N, bx, by, osign, maxdeg, buf_x, buf_y)
            if np.isnan(tx):
                continue
            w = wsite[i]
            r0 = row_of_cell[i]
            s0 = site_of_cell[i]
            wum = w * r_sw[r0]
            ly = ty - hgt[i] / 2
            best = 1e-9
            best_r = -1
            best_s = -1
            best_j = -1
            k = np.searchsorted(ys, ly)
            up = k
            dn = k - 1
            for _t in range(2 * reach_rows):
                if up < nr and (dn < 0 or ys[up] - ly <= ly - ys[dn]):
                    r = rows_by_y[up]
                    up += 1
                elif dn >= 0:
                    r = rows_by_y[dn]
                    dn -= 1
                else:
                    break
                sw = r_sw[r]
                if abs(sw * w - wum) > 1e-9 * wum:
                    continue
                st = np.int64(np.floor((tx - wum / 2 - r_x0[r]) / sw + 0.5))
                lo = max(st - reach_sites, 0)
                hi = min(st + reach_sites + w, r_ns[r])
                base = row_off[r]
                ny_ = r_y[r] + hgt[i] / 2
                sg = r_sign[r]
                q = lo
                while q < hi:
                    c = occ[base + q]
                    if c == -1 or c == i:
                        # a run of free sites (the cell's own count as free)
                        b0, e = _free_run(occ, base, q, r_ns[r], i)
                        if e - b0 >= w:
                            sp = min(max(st, b0), e - w)
                            nx_ = r_x0[r] + (sp + w / 2.0) * sw
                            room = _fits(D, bx[i], by[i], nx_, ny_, wum * hgt[i])
                            if room and not (r == r0 and sp == s0):
                                tick += 1
                                g = _swap_gain(i, -1, nx_, ny_, sg, 0.0, 0.0, 1.0, N, bx,
                                               by, osign, stamp, tick, False)
                                if g > best:
                                    best, best_r, best_s, best_j = g, r, sp, -1
                        q = e
                    elif c >= 0:
                        if wsite[c] == w and site_of_cell[c] == q and row_of_cell[c] == r \
                                and abs(q - st) <= swap_reach:
                            tick += 1
                            g = _swap_gain(i, c, bx[c], ny_, sg, bx[i],
                                           r_y[r0] + hgt[c] / 2, osign[i], N, bx, by, osign,
                                           stamp, tick, False)
                            if g > best:
                                best, best_r, best_s, best_j = g, r, q, c
                        q += 1
                    else:
                        q += 1
            if best_r < 0:
                continue
            r = best_r
            sp = best_s
            j = best_j
            tick += 1
            if j >= 0:
                _swap_gain(i, j, bx[j], r_y[r] + hgt[i] / 2, osign[j], bx[i],
                           r_y[r0] + hgt[j] / 2, osign[i], N, bx, by, osign, stamp, tick, True)
                xi, gi = bx[i], osign[i]
                bx[i], by[i], osign[i] = bx[j], r_y[r] + hgt[i] / 2, osign[j]
                bx[j], by[j], osign[j] = xi, r_y[r0] + hgt[j] / 2, gi
                row_of_cell[j], site_of_cell[j] = r0, s0
                for t in range(w):
                    occ[row_off[r0] + s0 + t] = j
                    occ[row_off[r] + sp + t] = i
            else:
                _swap_gain(i, -1, r_x0[r] + (sp + w / 2.0) * r_sw[r], r_y[r] + hgt[i] / 2,
                           r_sign[r], 0.0, 0.0, 1.0, N, bx, by, osign, stamp, tick, True)
                a_ = wum * hgt[i]
                use[_bin(bx[i], dx0, dbw, dnx), _bin(by[i], dy0, dbh, dny)] -= a_
                use[_bin(r_x0[r] + (sp + w / 2.0) * r_sw[r], dx0, dbw, dnx),
                    _bin(r_y[r] + hgt[i] / 2, dy0, dbh, dny)] += a_
                for t in range(w):
                    occ[row_off[r0] + s0 + t] = -1
                for t in range(w):
                    occ[row_off[r] + sp + t] = i
                bx[i] = r_x0[r] + (sp + w / 2.0) * r_sw[r]
                by[i] = r_y[r] + hgt[i] / 2
                osign[i] = r_sign[r]
            row_of_cell[i], site_of_cell[i] = r, sp
            total += best
            moves += 1
    return total, moves


@njit(cache=True)
def _adjacent_swap(seq_start, seq, wum, bx, by, osign, N, passes):
    """Swap neighbouring cells of a segment (the pair keeps its span) on a strict gain."""
    stamp = np.zeros(len(N[0]) - 1, np.int64)
    tick = 0
    total = 0.0
    swaps = 0
    for _p in range(passes):
        for s in range(len(seq_start) - 1):
            for t in range(seq_start[s], seq_start[s + 1] - 1):
                a = seq[t]
                b = seq[t + 1]
                left = bx[a] - wum[a] / 2
                right = bx[b] + wum[b] / 2
                nbx = left + wum[b] / 2
                nax = right - wum[a] / 2
                tick += 1
                g = _swap_gain(a, b, nax, by[a], osign[a], nbx, by[b], osign[b], N, bx, by,
                               osign, stamp, tick, False)
                if g > 1e-9:
                    tick += 1
                    _swap_gain(a, b, nax, by[a], osign[a], nbx, by[b], osign[b], N, bx, by,
                               osign, stamp, tick, True)
                    bx[a] = nax
                    bx[b] = nbx
                    seq[t] = b
                    seq[t + 1] = a
                    total += g
                    swaps += 1
    return total, swaps


def _density_caps(design: Design, seg, x, y, area, target_density: float, frozen) -> tuple:
    """The density bins a move must respect (the report's grid): usage by the cells' centres
    ``x, y`` and areas, capacity ``target_density`` × the row segments' area less partial
    blockages (frozen bins: no more than they hold).  ``(usage, capacity, x0, y0, bin width,
    bin height)`` for :func:`_global_moves`."""
    g = bin_grid(design)
    i_, j_ = g.locate(x, y)
    use = np.zeros(g.shape)
    np.add.at(use, (i_, j_), area)
    segr = np.stack([seg.x0 + seg.lo * seg.site, seg.y, seg.x0 + seg.hi * seg.site,
                     seg.y + seg.height], axis=1)
    cap = target_density * rect_area_map(g, segr)  # the segments hold the cells' sites too
    cap = np.maximum(cap - partial_capacity_loss(design, g, target_density), 0.0)
    if frozen is not None:
        cap = np.where(frozen, np.minimum(cap, use), cap)
    return (use, cap, g.xlo, g.ylo, g.bw, g.bh)


def _abutting_runs(design: Design, idx: np.ndarray, bx, by, w) -> tuple[np.ndarray, np.ndarray]:
    """The cells ``idx`` by row (y, then x) and the starts of their runs of abutting cells
    whose widths are whole sites: the pairs :func:`_adjacent_swap` may swap."""
    o2 = idx[np.lexsort((bx[idx], by[idx]))]
    yl = by[o2]
    brk = np.flatnonzero(np.diff(yl) != 0) + 1
    # split also where cells are not abutting (a gap or an obstacle between them)
    wl = w[o2]
    gap = (bx[o2][1:] - wl[1:] / 2) - (bx[o2][:-1] + wl[:-1] / 2)
    brk = np.union1d(brk, np.flatnonzero(gap > 1e-6) + 1)
    # a cell whose width is not a whole number of sites is never swapped this way (the pair
    # would leave the site grid)
    sw = float(np.median(design.row_site_width)) if len(design.row_site_width) else 1.0
    frac = np.abs(wl / sw - np.round(wl / sw)) > 1e-6
    brk = np.union1d(brk, np.concatenate([np.flatnonzero(frac), np.flatnonzero(frac) + 1]))
    brk = brk[(brk > 0) & (brk < len(o2))]
    return o2, np.concatenate([[0], brk, [len(o2)]]).astype(np.int64)


def detailed_place(design: Design, fp: Floorplan, cells: np.ndarray | None = None, *,
                   passes: int = 8, max_degree: int = 64, min_gain: float = 0.002,
                   target_density: float = 1.0, keep: np.ndarray | None = None,
                   avoid: np.ndarray | None = None, frozen: np.ndarray | None = None
                   ) -> tuple[Floorplan, dict]:
    """Lower the HPWL of a row-legal placement by cell swaps that keep it legal.

    Parameters
    ----------
    design : Design
    fp : Floorplan
        Cells already on rows and sites (:func:`legalize_cells`); not modified.
    cells : (n,) bool, optional
        Cells that may move (default :func:`cell_mask`).
    passes : int
        Most passes of global moves (then two of adjacent swaps).
    min_gain : float
        Stop once a pass lowers the HPWL by less than this fraction.
    target_density : float
        A cell moves into another density bin (the report's grid) only while that bin's cell
        area stays within this share of its row area (the maximum density under a partial
        blockage, where lower), so detailed placement does not pile
        cells up where the global placement spread them (swaps of equal widths are always
        allowed: they change no bin's fill).
    max_degree : int
        Nets with more pins are left out of the optimal-region estimate (their gains are still
        counted exactly).
    keep, avoid : (k, 4) arrays, optional
        Free sites only inside ``keep`` or only outside ``avoid`` (cell regions; as
        :func:`legalize_cells`).
    frozen : bool array of the report's bin grid, optional
        Bins whose cell area may not grow (routing hot spots the spreading opened up: the
        moves that lower wirelength would fill them again).

    Returns
    -------
    (Floorplan, dict)
        The new floorplan and ``dp_gain`` (µm of HPWL saved), ``dp_swaps``.
    """
    cells = cell_mask(design, fp) if cells is None else np.asarray(cells, bool)
    idx = np.flatnonzero(cells)
    out = fp.copy()
    if len(idx) < 2 or design.num_nets == 0:
        return out, {"dp_gain": 0.0, "dp_swaps": 0}
    w, h = fp.sizes()
    bx = (fp.x + w / 2).astype(np.float64)
    by = (fp.y + h / 2).astype(np.float64)
    # pin offsets: x as oriented now; y given for N and flipped by a sign for FS cells
    pb = design.pin_block
    pdx, pdy = orient_offsets(design.pin_dx, design.pin_dy, fp.orient[pb])
    fs = fp.orient == ORIENT_CODE["FS"]
    osign = np.ones(design.num_blocks)
    osign[cells & fs] = -1.0
    pdy = np.where((cells & fs)[pb], -pdy, pdy)  # N-orientation y offset for the moving cells
    pdx = np.ascontiguousarray(pdx)
    pdy = np.ascontiguousarray(pdy)
    # nets of every block (CSR)
    pn = design.pin_net
    o = np.argsort(pb, kind="stable")
    bnets = np.ascontiguousarray(pn[o])
    bnet_s = np.concatenate([[0], np.cumsum(np.bincount(pb, minlength=design.num_blocks))])
    ns = design.net_start
    # every net's pin bounding box, kept up to date by the kernels
    px = bx[pb] + pdx
    py = by[pb] + osign[pb] * pdy
    st = ns[:-1]
    bb = np.stack([np.minimum.reduceat(px, st), np.maximum.reduceat(px, st),
                   np.minimum.reduceat(py, st), np.maximum.reduceat(py, st)], axis=1)
    N = (ns, pb, pdx, pdy, bnet_s, bnets, o.astype(np.int64), np.ascontiguousarray(bb))
    # every site of every row: the cell on it, -1 free, -2 blocked
    seg = row_segments(design, fp, cells, keep=keep, avoid=avoid)
    nsites = design.row_num_sites.astype(np.int64)
    row_off = np.concatenate([[0], np.cumsum(nsites)]).astype(np.int64)
    if row_off[-1] > MAX_SITES:
        return out, {"dp_gain": 0.0, "dp_swaps": 0}
    occ = np.full(int(row_off[-1]), -2, np.int64)
    seg_rows = row_of(design, seg.x0 + seg.lo * seg.site, seg.y, seg.site)[0]
    _fill_runs(occ, row_off[seg_rows] + seg.lo, seg.hi - seg.lo, np.full(len(seg.lo), -1))
    r_of, off_site = row_of(design, fp.x[idx], fp.y[idx], w[idx])
    if (r_of < 0).any() or off_site.any():
        raise PlacementError("detailed placement needs every cell on a row site; legalise first")
    sw = design.row_site_width[r_of]
    site = np.round((fp.x[idx] - design.row_x[r_of]) / sw).astype(np.int64)
    wsite = np.zeros(design.num_blocks, np.int64)
    wsite[idx] = np.ceil(w[idx] / sw - 1e-9).astype(np.int64)
    _fill_runs(occ, row_off[r_of] + site, wsite[idx], idx.astype(np.int64))
    row_of_cell = np.full(design.num_blocks, -1, np.int64)
    site_of_cell = np.zeros(design.num_blocks, np.int64)
    row_of_cell[idx] = r_of
    site_of_cell[idx] = site
    r_sign = np.where(design.row_orient == ORIENT_CODE["FS"], -1.0, 1.0)
    rows_by_y = np.argsort(design.row_y, kind="stable").astype(np.int64)
    order = idx[np.lexsort((bx[idx], by[idx]))]
    nbuf = 2 * int(np.diff(bnet_s).max()) + 2
    D = _density_caps(design, seg, bx[idx], by[idx], (wsite[idx] * sw) * h[idx],
                      target_density, frozen)
    hpwl0 = hpwl(design, fp)
    g1 = 0.0
    n1 = 0
    for _p in range(passes):  # until a pass saves less than min_gain of what is left
        g, k = _global_moves(order, wsite, bx, by, h.astype(np.float64), osign, row_of_cell,
                             site_of_cell, occ, row_off, design.row_x, design.row_site_width,
                             design.row_y, nsites, r_sign, rows_by_y, N, max_degree, 1, nbuf,
                             3, 24, 12, D)
        g1 += g
        n1 += k
        if g < min_gain * max(hpwl0 - g1, 1e-12):
            break
    o2, seq_start = _abutting_runs(design, idx, bx, by, w)
    g2, n2 = _adjacent_swap(seq_start, o2.copy(), w.astype(np.float64), bx, by, osign, N, 2)
    out.x[idx] = bx[idx] - w[idx] / 2
    out.y[idx] = by[idx] - h[idx] / 2
    out.orient[idx] = np.where(osign[idx] < 0, ORIENT_CODE["FS"], ORIENT_CODE["N"])
    return out, {"dp_gain": float(g1 + g2), "dp_swaps": int(n1 + n2)}

