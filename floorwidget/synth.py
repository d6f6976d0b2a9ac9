"""Synthetic designs: Rent's-rule netlists of any size, and instances with a known optimum.

Both generators are vectorised (a Python loop over hierarchy levels at most, never over cells or
nets) and deterministic for a seed.  The designs are invented test material, not circuits.

References
----------
.. [1] B. S. Landman, R. L. Russo, "On a pin versus block relationship for partitions of logic
   graphs", IEEE Transactions on Computers C-20(12), 1971.
.. [2] D. Stroobandt, P. Verplaetse, J. Van Campenhout, "Generating synthetic benchmark circuits
   for evaluating CAD tools", IEEE TCAD 19(9), 2000 (from memory): building a netlist by
   recursive combination of blocks so that every level obeys Rent's rule.
.. [3] C.-C. Chang, J. Cong, M. Xie, "Optimality and scalability study of existing placement
   algorithms", ASP-DAC 2003 (from memory): placement instances with a known optimal
   wirelength.
"""

from __future__ import annotations

import math

import numpy as np

from .design import CELL, FIXED, MACRO, MOVABLE, TERMINAL, Design, Floorplan

__all__ = ["rent_design", "known_optimum_design", "net_lower_bound", "hierarchy_bounds"]

ROW_HEIGHT = 2.0
SITE_WIDTH = 0.2


def hierarchy_bounds(num_cells: int, level: int) -> np.ndarray:
    """Boundaries of the ``2**level`` blocks of the bisection hierarchy :func:`rent_design` uses.

    Cell ``i`` (in index order) belongs to block ``j`` when ``b[j] <= i < b[j + 1]``.
    """
    return (np.arange(2**level + 1, dtype=np.int64) * num_cells) >> level


def _expected_degree(mean_extra: float, cap: np.ndarray) -> np.ndarray:
    """E[min(2 + X, cap)] for X geometric on {0, 1, ...} with mean ``mean_extra``."""
    q = mean_extra / (1.0 + mean_extra)
    cap = np.maximum(np.asarray(cap, dtype=np.float64), 2.0)
    if q == 0:
        return np.full_like(cap, 2.0)
    return 2.0 + q * (1.0 - q ** (cap - 2.0)) / (1.0 - q)


def rent_design(num_cells: int, *, rent_exponent: float = 0.6, avg_pins: float = 4.0,
                avg_degree: float = 4.0, num_macros: int = 0, macro_area: float = 0.4,
                num_terminals: int | None = None, utilisation: float = 0.7, seed: int = 0,
                name: str | None = None, validate: bool = True) -> Design:
    """A standard-cell netlist whose blocks follow Rent's rule ``T = t * B**p`` [1]_.

    Construction (in the spirit of [2]_): cells ``0..N-1`` are the leaves of a balanced
    bisection hierarchy (:func:`hierarchy_bounds`).  Where two sibling blocks of ``B`` cells
    merge, ``c(B) = k * B**p * (1 - 2**(p - 1))`` nets are created, each with one pin in either
    sibling and its other pins anywhere in the parent.  A block then collects ``c(B)`` terminals
    from its own merge, ``c(2B)/2`` from its parent's, ``c(4B)/4`` from the next and so on:
    ``sum_j c(2**j B) / 2**j = k * B**p``, Rent's rule with exponent ``p``.  The top of the
    hierarchy is closed by ``t * N**p`` I/O terminals, each wired to a uniformly random cell,
    which supplies exactly the missing tail of that sum.  ``k`` is set so that the average cell
    has ``avg_pins`` pins.

    Parameters
    ----------
    num_cells : int
        Standard cells (``N``), of height :data:`ROW_HEIGHT` and 3–12 sites of
        :data:`SITE_WIDTH`.
    rent_exponent : float
        ``p`` in (0, 1).
    avg_pins : float
        Mean pins per cell (about Rent's ``t``).
    avg_degree : float
        Mean pins per net (two plus a geometric number).
    num_macros : int
        Hard macros in four size classes (heights whole rows, widths whole sites) taking
        ``macro_area`` of the placeable area, with pins along one edge, wired to cells of a
        random local block.
    num_terminals : int, optional
        I/O terminals on the die boundary (default: Rent's rule at the top level).
    utilisation : float
        (cell + macro area) / die area; the die is square, covered by rows.
    seed : int
    name : str, optional
    validate : bool
        Run :meth:`Design.validate` (seconds at 10**6 cells; the construction is valid by
        design, so large benchmarks may skip it).

    Returns
    -------
    Design
        Cells and macros movable at the die centre, terminals fixed on the boundary.

    Examples
    --------
    >>> d = rent_design(1000, seed=1)
    >>> d.num_blocks > 1000
    True
    """
    N = int(num_cells)
    p = float(rent_exponent)
    _check_rent_args(N, p, utilisation, avg_degree)
    rng = np.random.default_rng(seed)
    extra = float(avg_degree) - 2.0
    k, net_start, pin_cell = _hierarchy_nets(N, p, extra, avg_pins, rng)
    net_start, pin_cell = _wire_lonely(N, net_start, pin_cell)
    P = len(pin_cell)
    # cell geometry
    sites = rng.integers(3, 13, size=N)
    cw = sites * SITE_WIDTH
    ch = np.full(N, ROW_HEIGHT)
    cell_area = float((cw * ch).sum())
    M = int(num_macros)
    mw, mh = _macro_sizes(M, macro_area, cell_area, utilisation, rng)
    side = math.sqrt((cell_area + float((mw * mh).sum())) / utilisation)
    nrows = max(1, math.ceil(side / ROW_HEIGHT))
    nsites = max(1, math.ceil(side / SITE_WIDTH))
    W, H = nsites * SITE_WIDTH, nrows * ROW_HEIGHT
    T = _rent_terminals(N, p, k, extra) if num_terminals is None else int(num_terminals)
    io_cell = rng.integers(0, N, size=T)

    pin_block = [pin_cell]
    pin_dx = [(rng.random(P) - 0.5) * 0.8 * cw[pin_cell]]
    pin_dy = [(rng.random(P) - 0.5) * 0.8 * ROW_HEIGHT]
    extra_starts = []
    if M:
        blk, ddx, ddy, deg_m = _macro_nets(N, p, avg_pins, cw, mw, mh, cell_area, rng)
        pin_block.append(blk)
        pin_dx.append(ddx)
        pin_dy.append(ddy)
        extra_starts.append(deg_m)
    # I/O nets: terminal and one cell
    if T:
        blk = np.stack([N + M + np.arange(T), io_cell], 1).ravel()
        pin_block.append(blk)
        pin_dx.append(np.where(np.arange(2 * T) % 2 == 1,
                               (rng.random(2 * T) - 0.5) * 0.8 * cw[blk % N], 0.0))
        pin_dy.append(np.zeros(2 * T))
        extra_starts.append(np.full(T, 2, np.int64))
    if extra_starts:
        more = np.concatenate(extra_starts)
        net_start = np.concatenate([net_start, P + np.cumsum(more)])
    # geometry on a 1 nm grid (a DEF-like database unit; short numbers in written files)
    pin_dx = np.round(np.concatenate(pin_dx), 3)
    pin_dy = np.round(np.concatenate(pin_dy), 3)
    tx, ty = _perimeter(T, W, H)
    kind = np.concatenate([np.full(N, CELL), np.full(M, MACRO), np.full(T, TERMINAL)])
    width = np.round(np.concatenate([cw, mw, np.zeros(T)]), 3)
    height = np.round(np.concatenate([ch, mh, np.zeros(T)]), 3)
    names = ([f"c{i}" for i in range(N)] + [f"m{i}" for i in range(M)]
             + [f"io{i}" for i in range(T)])
    W, H = round(W, 3), round(H, 3)
    x = np.round(np.concatenate([W / 2 - width[:N + M] / 2, tx]), 3)
    y = np.round(np.concatenate([H / 2 - height[:N + M] / 2, ty]), 3)
    status = np.concatenate([np.full(N + M, MOVABLE), np.full(T, FIXED)]).astype(np.int8)
    rows = {"x": np.zeros(nrows), "y": np.round(np.arange(nrows) * ROW_HEIGHT, 3),
            "height": np.full(nrows, ROW_HEIGHT), "site_width": np.full(nrows, SITE_WIDTH),
            "num_sites": np.full(nrows, nsites), "orient": np.where(np.arange(nrows) % 2, 5, 0)}
    return Design(name or f"rent{N}", [0.0, 0.0, W, H], names, kind, width, height, net_start,
                  np.concatenate(pin_block), pin_dx, pin_dy, rows=rows, x=x, y=y,
                  status=status, validate=validate)


def _check_rent_args(N: int, p: float, utilisation: float, avg_degree: float) -> None:
    """ValueError for arguments :func:`rent_design` cannot build from."""
    if N < 2:
        raise ValueError("rent_design needs at least two cells")
    if not 0.0 < p < 1.0:
        raise ValueError("rent_exponent must lie in (0, 1)")
    if not 0.0 < utilisation <= 1.0:
        raise ValueError("utilisation must lie in (0, 1]")
    if avg_degree < 2:
        raise ValueError("avg_degree must be at least 2")


def _hierarchy_nets(N: int, p: float, extra: float, avg_pins: float, rng):
    """The nets of the bisection hierarchy (:func:`rent_design`): ``c(B)`` per merge of two
    sibling blocks, one pin in either sibling and the others anywhere in the parent.

    Returns ``k`` (the Rent coefficient that gives ``avg_pins`` pins per cell), ``net_start``
    and the cell of every pin.
    """
    levels = max(1, math.ceil(math.log2(N)))
    # nets per merge at each level, before scaling: B**p (1 - 2**(p-1))
    lev = np.arange(levels)
    child = N / 2.0 ** (lev + 1)
    base = child**p * (1.0 - 2.0 ** (p - 1.0))
    merges = np.array([int(((np.diff(hierarchy_bounds(N, int(lv) + 1)).reshape(-1, 2) > 0)
                            .all(axis=1)).sum()) for lv in lev])
    deg_mean = _expected_degree(extra, 2 * child)
    k = avg_pins * N / float((merges * base * deg_mean).sum())

    starts_a, sizes_a, starts_b, sizes_b, plo, psz = [], [], [], [], [], []
    for lv in range(levels):  # a loop over hierarchy levels, never over nets
        b1 = hierarchy_bounds(N, lv + 1)
        a_lo, a_hi, c_hi = b1[0:-1:2], b1[1::2], b1[2::2]
        ok = (a_hi > a_lo) & (c_hi > a_hi)
        a_lo, a_hi, c_hi = a_lo[ok], a_hi[ok], c_hi[ok]
        lam = k * base[lv]
        cnt = np.floor(lam) + (rng.random(len(a_lo)) < lam - np.floor(lam))
        cnt = cnt.astype(np.int64)
        mid = np.repeat(np.arange(len(a_lo)), cnt)
        starts_a.append(a_lo[mid])
        sizes_a.append((a_hi - a_lo)[mid])
        starts_b.append(a_hi[mid])
        sizes_b.append((c_hi - a_hi)[mid])
        plo.append(a_lo[mid])
        psz.append((c_hi - a_lo)[mid])
    a_lo = np.concatenate(starts_a)
    a_sz = np.concatenate(sizes_a)
    b_lo = np.concatenate(starts_b)
    b_sz = np.concatenate(sizes_b)
    p_lo = np.concatenate(plo)
    p_sz = np.concatenate(psz)
    del starts_a, sizes_a, starts_b, sizes_b, plo, psz
    m = len(a_lo)
    deg = 2 + (rng.geometric(1.0 / (1.0 + extra), size=m) - 1 if extra > 0
               else np.zeros(m, np.int64))
    deg = np.minimum(np.minimum(deg, p_sz), 64).astype(np.int64)
    net_start = np.zeros(m + 1, np.int64)
    np.cumsum(deg, out=net_start[1:])
    P = int(net_start[-1])
    first = net_start[:-1]
    pin_cell = np.empty(P, np.int64)
    # every pin uniform in its parent, then the first two forced one into each sibling
    owner = np.repeat(np.arange(m), deg)
    pin_cell[:] = p_lo[owner] + (rng.random(P) * p_sz[owner]).astype(np.int64)
    del owner
    pin_cell[first] = a_lo + (rng.random(m) * a_sz).astype(np.int64)
    pin_cell[first + 1] = b_lo + (rng.random(m) * b_sz).astype(np.int64)
    return k, net_start, pin_cell


def _wire_lonely(N: int, net_start, pin_cell):
    """Cells nobody connects get a two-pin net to a neighbour (the lowest level of the
    hierarchy): ``net_start`` and ``pin_cell`` with those nets appended."""
    lonely = np.flatnonzero(np.bincount(pin_cell, minlength=N) == 0)
    if not len(lonely):
        return net_start, pin_cell
    P = len(pin_cell)
    mate = np.where(lonely + 1 < N, lonely + 1, lonely - 1)
    pin_cell = np.concatenate([pin_cell, np.stack([lonely, mate], 1).ravel()])
    net_start = np.concatenate([net_start, P + 2 * np.arange(1, len(lonely) + 1)])
    return net_start, pin_cell


def _macro_sizes(M: int, macro_area: float, cell_area: float, utilisation: float, rng):
    """Widths and heights of ``M`` hard macros in four size classes taking ``macro_area`` of
    the placeable area: heights whole rows, widths whole sites, each side at most 0.45 of the
    estimated die side."""
    if not M:
        return np.zeros(0), np.zeros(0)
    factor = np.array([0.5, 1.0, 2.0, 4.0])
    aspect = np.array([1.0, 1.6, 0.6, 2.0])
    cls = rng.integers(0, 4, size=M)
    frac = min(max(float(macro_area), 0.0), 0.95)
    unit = frac / (1.0 - frac) * cell_area / float(factor[cls].sum())
    area = unit * factor[cls]
    side_est = math.sqrt((cell_area + area.sum()) / utilisation)
    mh = np.sqrt(area / aspect[cls])
    mw = area / mh
    mh = np.clip(np.round(mh / ROW_HEIGHT), 2, None) * ROW_HEIGHT
    mw = np.clip(np.round(mw / SITE_WIDTH), 10, None) * SITE_WIDTH
    cap_h = max(2.0, math.floor(0.45 * side_est / ROW_HEIGHT)) * ROW_HEIGHT
    cap_w = max(10.0, math.floor(0.45 * side_est / SITE_WIDTH)) * SITE_WIDTH
    return np.minimum(mw, cap_w), np.minimum(mh, cap_h)


def _rent_terminals(N: int, p: float, k: float, extra: float) -> int:
    """I/O terminals by Rent's rule at the top level, between 4 and ``N``: a block's terminals
    are 1 per net of its own merge and about d/2 per net of an ancestor's."""
    r = 2.0 ** (p - 1.0)
    t_rent = k * ((1.0 - r) + (2.0 + extra) / 2.0 * r)
    return max(4, min(int(round(t_rent * N**p)), N))


def _macro_nets(N: int, p: float, avg_pins: float, cw, mw, mh, cell_area: float, rng):
    """Macro nets: each macro pin (evenly along one random edge) to 1..3 cells of a local
    block of about 256 cells, the macro pin first.

    Returns the pins' blocks, offsets ``dx, dy`` and the degree of each net.
    """
    M = len(mw)
    npins = np.clip(np.round(avg_pins * (mw * mh / (cell_area / N)) ** p / 4.0),
                    8, 256).astype(np.int64)
    mp = int(npins.sum())
    mac = np.repeat(np.arange(M), npins)
    j = np.arange(mp) - np.repeat(np.cumsum(npins) - npins, npins)
    frac_along = (j + 0.5) / npins[mac]
    edge = rng.integers(0, 4, size=M)[mac]
    w_, h_ = mw[mac], mh[mac]
    dx = np.select([edge == 0, edge == 1, edge == 2, edge == 3],
                   [(frac_along - 0.5) * w_, w_ / 2, (0.5 - frac_along) * w_, -w_ / 2])
    dy = np.select([edge == 0, edge == 1, edge == 2, edge == 3],
                   [-h_ / 2, (frac_along - 0.5) * h_, h_ / 2, (0.5 - frac_along) * h_])
    local = min(N, 256)
    centre = rng.integers(0, N - local + 1, size=M)[mac]
    ncell = rng.integers(1, 4, size=mp)
    cells_owner = np.repeat(np.arange(mp), ncell)
    cells = centre[cells_owner] + rng.integers(0, local, size=len(cells_owner))
    deg_m = 1 + ncell
    st = np.zeros(mp + 1, np.int64)
    np.cumsum(deg_m, out=st[1:])
    blk = np.empty(int(st[-1]), np.int64)
    ddx = np.empty(len(blk))
    ddy = np.empty(len(blk))
    is_first = np.zeros(len(blk), bool)
    is_first[st[:-1]] = True
    blk[is_first] = N + mac
    ddx[is_first], ddy[is_first] = dx, dy
    blk[~is_first] = cells
    ddx[~is_first] = (rng.random(len(cells)) - 0.5) * 0.8 * cw[cells]
    ddy[~is_first] = (rng.random(len(cells)) - 0.5) * 0.8 * ROW_HEIGHT
    return blk, ddx, ddy, deg_m


def _perimeter(T: int, W: float, H: float):
    """``T`` terminal positions spread evenly along the die's perimeter, anticlockwise from
    the lower-left corner."""
    s = (np.arange(T) + 0.5) / max(T, 1) * 2 * (W + H)
    tx = np.select([s < W, s < W + H, s < 2 * W + H], [s, W, W - (s - W - H)], 0.0)
    ty = np.select([s < W, s < W + H, s < 2 * W + H], [0.0, s - W, H], H - (s - 2 * W - H))
    return tx, ty


# ---------------------------------------------------------------------------------------------


def net_lower_bound(degree) -> np.ndarray:
    """Least HPWL of a net of ``degree`` unit cells on a unit grid, pins at the cell centres.

    ``k`` distinct unit slots whose centres span ``w x h`` cover ``(w + 1)(h + 1) >= k`` slots,
    so ``HPWL >= min over a*b >= k of (a + b) - 2 = ceil(2 sqrt(k)) - 2``, reached by filling
    ``a = ceil(sqrt(k))`` columns row by row [3]_.
    """
    k = np.asarray(degree, dtype=np.int64)
    a = np.ceil(np.sqrt(k)).astype(np.int64)
    a = np.where(a * a < k, a + 1, a)          # guard against rounding in sqrt
    a = np.where((a - 1) * (a - 1) >= k, a - 1, a)
    b = -(-k // a)
    return (a + b - 2).astype(np.float64)


_DEG_VALUES = np.array([2, 3, 4, 5, 6, 8, 10, 12, 16])
_DEG_PROBS = np.array([0.58, 0.16, 0.09, 0.05, 0.04, 0.03, 0.02, 0.02, 0.01])


def known_optimum_design(side: int, *, seed: int = 0, nets_per_cell: float = 1.0,
                         num_terminals: int | None = None) -> tuple[Design, float]:
    """A placement instance whose optimal (legal) HPWL is known, after [3]_.

    ``side * side`` unit cells (1 x 1 µm) fill a core of exactly ``side`` rows of ``side``
    one-µm sites (utilisation 1).  In a planted placement (a random assignment of cells to
    slots) every net connects the first ``k`` slots, row by row, of an ``a x b`` box with
    ``a = ceil(sqrt k)``, ``b = ceil(k / a)``, so each net has the least HPWL any placement of
    ``k`` distinct unit slots allows (:func:`net_lower_bound`).  Fixed I/O terminals sit on the
    die edge at the middle of a boundary slot's outer side, each wired to the cell planted
    there: HPWL 0.5, again the least possible.  Every net at its own lower bound at once makes
    the planted placement optimal among legal placements; the optimum is the sum of the bounds.
    (A placement with overlaps, such as a global placement, can go below it.)

    Net degrees follow a fixed distribution with many two-pin nets; a cell no net reaches gets a
    two-pin net to a neighbouring slot (bound 1).

    Parameters
    ----------
    side : int
        Cells per side (``side**2`` cells).
    seed : int
    nets_per_cell : float
        Nets (before terminals and neighbour nets) per cell.
    num_terminals : int, optional
        Default ``max(4, side // 2)``, spread over the four edges.

    Returns
    -------
    design : Design
        Cells movable and stacked at the core centre in ``design.initial``; the planted
        optimum is ``design.planted`` (a :class:`Floorplan`).
    optimal_hpwl : float
        Unweighted HPWL of ``design.planted``, the sum of the per-net lower bounds.

    Examples
    --------
    >>> d, opt = known_optimum_design(8, seed=0)
    >>> d.num_blocks >= 64
    True
    """
    S = int(side)
    if S < 2:
        raise ValueError("side must be at least 2")
    rng = np.random.default_rng(seed)
    N = S * S
    slot_of_cell = rng.permutation(N)
    cell_of_slot = np.empty(N, np.int64)
    cell_of_slot[slot_of_cell] = np.arange(N)

    m = int(round(nets_per_cell * N))
    k = rng.choice(_DEG_VALUES, size=m, p=_DEG_PROBS / _DEG_PROBS.sum())
    k = np.minimum(k, N)
    a = np.ceil(np.sqrt(k)).astype(np.int64)
    a = np.where((a - 1) * (a - 1) >= k, a - 1, a)
    a = np.minimum(a, S)
    b = -(-k // a)
    ok = b <= S
    k, a, b = k[ok], a[ok], b[ok]
    m = len(k)
    x0 = (rng.random(m) * (S - a + 1)).astype(np.int64)
    y0 = (rng.random(m) * (S - b + 1)).astype(np.int64)
    st = np.zeros(m + 1, np.int64)
    np.cumsum(k, out=st[1:])
    owner = np.repeat(np.arange(m), k)
    j = np.arange(int(st[-1])) - st[owner]
    sx = x0[owner] + j % a[owner]
    sy = y0[owner] + j // a[owner]
    pins = cell_of_slot[sy * S + sx]
    bound = net_lower_bound(k)

    lonely = np.flatnonzero(np.bincount(pins, minlength=N) == 0)
    if len(lonely):
        ls = slot_of_cell[lonely]
        lx, ly = ls % S, ls // S
        nx = np.where(lx + 1 < S, lx + 1, lx - 1)
        mate = cell_of_slot[ly * S + nx]
        pins = np.concatenate([pins, np.stack([lonely, mate], 1).ravel()])
        st = np.concatenate([st, st[-1] + 2 * np.arange(1, len(lonely) + 1)])
        bound = np.concatenate([bound, np.ones(len(lonely))])

    # terminals on the four edges, each at a boundary slot
    T = max(4, S // 2) if num_terminals is None else int(num_terminals)
    edge = np.arange(T) % 4
    pos = (rng.random(T) * S).astype(np.int64)
    slot_x = np.select([edge == 0, edge == 1, edge == 2], [pos, S - 1, pos], 0)
    slot_y = np.select([edge == 0, edge == 1, edge == 2], [0, pos, S - 1], pos)
    tx = np.select([edge == 0, edge == 1, edge == 2], [pos + 0.5, float(S), pos + 0.5], 0.0)
    ty = np.select([edge == 0, edge == 1, edge == 2], [0.0, pos + 0.5, float(S)], pos + 0.5)
    tcell = cell_of_slot[slot_y * S + slot_x]
    pins = np.concatenate([pins, np.stack([N + np.arange(T), tcell], 1).ravel()])
    st = np.concatenate([st, st[-1] + 2 * np.arange(1, T + 1)])
    bound = np.concatenate([bound, np.full(T, 0.5)])

    n = N + T
    kind = np.concatenate([np.full(N, CELL), np.full(T, TERMINAL)])
    width = np.concatenate([np.ones(N), np.zeros(T)])
    height = width.copy()
    names = [f"u{i}" for i in range(N)] + [f"pad{i}" for i in range(T)]
    status = np.concatenate([np.full(N, MOVABLE), np.full(T, FIXED)]).astype(np.int8)
    c = S / 2 - 0.5
    x = np.concatenate([np.full(N, c), tx])
    y = np.concatenate([np.full(N, c), ty])
    rows = {"x": np.zeros(S), "y": np.arange(S, dtype=np.float64), "height": np.ones(S),
            "site_width": np.ones(S), "num_sites": np.full(S, S),
            "orient": np.where(np.arange(S) % 2, 5, 0)}
    d = Design(f"optimum{S}", [0.0, 0.0, float(S), float(S)], names, kind, width, height, st,
               pins, np.zeros(len(pins)), np.zeros(len(pins)), rows=rows, x=x, y=y,
               status=status)
    assert d.num_blocks == n
    px = np.concatenate([(slot_of_cell % S).astype(np.float64), tx])
    py = np.concatenate([(slot_of_cell // S).astype(np.float64), ty])
    d.planted = Floorplan(d, px, py, None, status, info={"optimal_hpwl": float(bound.sum())})
    return d, float(bound.sum())
