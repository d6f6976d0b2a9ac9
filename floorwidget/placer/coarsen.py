"""Multilevel coarsening of a netlist into clusters (vectorised over the CSR arrays).

A level merges standard cells and soft clusters that share nets: heavy-edge matching on the
clique expansion of the small nets (Karypis, Kumar, SIAM J. Sci. Comput. 20(1), 1998), with the
best-choice score ``w(u, v) / (area(u) + area(v))`` that keeps cluster areas even (Nam, Reda,
Alpert, Villarrubia, Kahng, Proc. ISPD 2005), divided by the pair's algebraic distance (Chen,
Safro, SIAM J. Sci. Comput. 33(6), 2011) so that a net spanning far parts of the design does not
pull its ends together.  Each round matches every free block with its best free neighbour when
the choice is mutual; the blocks left over then join the pair they like best when the area
bound allows.  Macros, terminals and every PINNED or FIXED block stay singletons at every
level.

The clustered design is an ordinary :class:`~floorwidget.design.Design`: merged blocks are soft
clusters (kind :data:`~floorwidget.design.CLUSTER`, square, of the members' total area) and
carry their members through :meth:`Clustering.members`; pins of a cluster sit at its centre,
nets inside one block vanish, a net's pins on one cluster become one pin, parallel two-pin nets
become one of their summed weight, and a movable cell left alone is a cluster of one.

References
----------
G. Karypis, V. Kumar, SIAM J. Scientific Computing 20(1), 1998 (multilevel coarsening by
heavy-edge matching).
G.-J. Nam, S. Reda, C. J. Alpert, P. G. Villarrubia, A. B. Kahng, Proc. ISPD 2005 (best-choice
clustering for placement).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp

from ..design import CELL, CLUSTER, MOVABLE, TERMINAL, CellRegions, Design, Floorplan

__all__ = ["Clustering", "coarsen", "coarsen_level"]

MAX_CLIQUE = 16       # nets of more pins are left out of the matching score (common practice)
ROUNDS = 3            # mutual-matching rounds per level
ALG_VECTORS = 8       # algebraic-distance test vectors (Chen, Safro 2011 use 5-10)
ALG_ITERATIONS = 20   # and Jacobi over-relaxation sweeps
ALG_EPS = 1e-3        # added to the algebraic distance that divides the matching score
MIN_TARGET = 2000     # max_pins never asks for fewer clusters than this (or target / 4)
MIN_SHRINK = 0.9      # a level keeping more than this share of the free blocks ends it


@dataclass
class Clustering:
    """The levels of a coarsening, finest first.

    Attributes
    ----------
    designs : list of Design
        ``designs[0]`` is the input design; ``designs[k]`` the clustered design of level ``k``.
    parent : list of (n_k,) int64 arrays
        ``parent[k][i]`` is the block of level ``k + 1`` that block ``i`` of level ``k`` went
        into.
    nets : list of int64 arrays
        ``nets[k][j]`` is the net of level ``k`` that net ``j`` of level ``k + 1`` comes from.
    """

    designs: list
    parent: list
    nets: list

    def net_origin(self, level: int) -> np.ndarray:
        """Net of the input design that every net of level ``level`` comes from."""
        m = np.arange(self.designs[level].num_nets)
        for k in range(level - 1, -1, -1):
            m = self.nets[k][m]
        return m

    @property
    def num_levels(self) -> int:
        """Levels including the input design."""
        return len(self.designs)

    @property
    def coarsest(self) -> Design:
        return self.designs[-1]

    def cluster_of(self, level: int) -> np.ndarray:
        """``(n_0,)`` block of level ``level`` that each block of the input design is in."""
        m = np.arange(self.designs[0].num_blocks)
        for k in range(level):
            m = self.parent[k][m]
        return m

    def members(self, level: int) -> tuple[np.ndarray, np.ndarray]:
        """Members of every block of level ``level`` as CSR ``(start, block)`` into the input
        design (each input block exactly once)."""
        c = self.cluster_of(level)
        order = np.argsort(c, kind="stable")
        counts = np.bincount(c, minlength=self.designs[level].num_blocks)
        start = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
        return start, order.astype(np.int64)

    def with_constraints(self, top: Design) -> Clustering:
        """These levels with the blockages of ``top`` (a design with the netlist of the
        coarsest level, e.g. after hand edits) and the halos of its singletons on every
        level.  Cell regions stay those of each level (clusters cannot take members')."""
        c = self.coarsest
        if top is c:
            return self
        if not top.same_netlist(c):
            raise ValueError("the design is not the clustering's coarsest level")
        single_top = np.bincount(self.cluster_of(0), minlength=c.num_blocks) == 1
        designs = []
        for k, d in enumerate(self.designs):
            m = np.arange(d.num_blocks)
            for j in range(k, self.num_levels - 1):
                m = self.parent[j][m]
            halo = d.halo.copy()
            s = single_top[m]
            halo[s] = top.halo[m[s]]
            designs.append(top if k == self.num_levels - 1 else
                           d.derive(blockages=top.blockages,
                                    blockage_max_density=top.blockage_max_density, halo=halo,
                                    power=top.power))
        return Clustering(designs, self.parent, self.nets)

    def project(self, level: int, fp: Floorplan, base: Floorplan | None = None,
                seed: int = 0) -> Floorplan:
        """Floorplan of level ``level - 1`` from ``fp`` of level ``level``: singletons keep
        position and orientation; members of a merged cluster start at its centre, spread
        uniformly over a square of half its side (seeded), so that the next spreading step
        starts from distinct points.  Statuses come from ``base`` (a floorplan of level
        ``level - 1``; default that level's initial floorplan)."""
        fine = self.designs[level - 1]
        par = self.parent[level - 1]
        coarse = self.designs[level]
        cx, cy = fp.centres()
        out = (fine.initial if base is None else base).copy()
        single = np.bincount(par, minlength=coarse.num_blocks)[par] == 1
        rng = np.random.default_rng(seed + level)
        side = np.sqrt(coarse.width * coarse.height)[par]
        jx = (rng.random(fine.num_blocks) - 0.5) * 0.5 * side
        jy = (rng.random(fine.num_blocks) - 0.5) * 0.5 * side
        jx[single] = 0.0
        jy[single] = 0.0
        out.orient[single] = fp.orient[par[single]]
        fw, fh = out.sizes()
        out.x[:] = cx[par] + jx - fw / 2
        out.y[:] = cy[par] + jy - fh / 2
        out.x[single] = fp.x[par[single]]
        out.y[single] = fp.y[par[single]]
        return out


def _free_mask(design: Design, fp: Floorplan) -> np.ndarray:
    """Blocks that may merge: movable standard cells and soft clusters."""
    k = design.kind
    return (fp.status == MOVABLE) & ((k == CELL) | (k == CLUSTER))


def _clique_edges(design: Design, free: np.ndarray, max_degree: int):
    """Clique expansion of the nets of 2..``max_degree`` pins among free blocks: ``(u, v, w)``
    with ``u < v`` and weight ``net_weight / (p - 1)`` for a net of ``p`` distinct free pins."""
    pb = design.pin_block
    start = design.net_start
    net = np.repeat(np.arange(design.num_nets), np.diff(start))
    on = free[pb]
    pb, net = pb[on], net[on]
    # distinct (net, block) pins: a block with two pins on one net counts once
    key = _unique_sorted(net.astype(np.int64) * design.num_blocks + pb)
    net = key // design.num_blocks
    pb = key % design.num_blocks
    deg = np.bincount(net, minlength=design.num_nets)
    d = deg[net]
    us, vs, ws = [], [], []
    first = np.concatenate([[0], np.cumsum(deg)])[:-1][net]  # each pin's net start
    pos = np.arange(len(net)) - first                          # rank of the pin in its net
    wt = design.net_weight[net] / np.maximum(d - 1, 1)
    for p in range(2, max_degree + 1):
        sel = np.flatnonzero((d == p) & (pos == 0))  # first pin of every net of p pins
        if not len(sel):
            continue
        blocks = pb[sel[:, None] + np.arange(p)]
        w = wt[sel]
        for i in range(p - 1):
            for j in range(i + 1, p):
                us.append(blocks[:, i])
                vs.append(blocks[:, j])
                ws.append(w)
    if not us:
        e = np.zeros(0, np.int64)
        return e, e, np.zeros(0)
    return np.concatenate(us), np.concatenate(vs), np.concatenate(ws)


def _unique_sorted(a: np.ndarray) -> np.ndarray:
    """Sorted distinct values of an integer array (a sort and a diff: faster than a hash
    table on millions of keys)."""
    a = np.sort(a)
    return a[np.r_[True, a[1:] != a[:-1]]] if len(a) else a


def _best(rows, cols, score, n):
    """Best column of every row (highest score, the first one on ties; -1 where a row has no
    candidate).  ``rows`` must be sorted (as a CSR matrix's expanded rows are)."""
    best = np.full(n, -1, np.int64)
    if not len(rows):
        return best
    first = np.flatnonzero(np.r_[True, rows[1:] != rows[:-1]])
    top = np.maximum.reduceat(score, first)
    seg = np.cumsum(np.r_[True, rows[1:] != rows[:-1]]) - 1   # segment of every entry
    hit = np.flatnonzero(score == top[seg])
    keep = np.r_[True, seg[hit[1:]] != seg[hit[:-1]]]
    hit = hit[keep]
    best[rows[hit]] = cols[hit]
    return best


def _weights(design: Design, free: np.ndarray, max_degree: int):
    """Symmetric clique-expansion weight matrix among the free blocks (COO, row-sorted); blocks
    of different cell regions (or one in a region, one not) are not joined, so that a cluster
    lies in one region or none and keeps its fence on every level."""
    n = design.num_blocks
    u, v, w = _clique_edges(design, free, max_degree)
    m = design.regions.member
    same = m[u] == m[v]
    u, v, w = u[same], v[same], w[same]
    W = sp.coo_array((w, (u, v)), shape=(n, n)).tocsr()
    W.sum_duplicates()
    return (W + W.T).tocoo()


def algebraic_coordinates(design: Design, free: np.ndarray, *, vectors: int | None = None,
                          iterations: int | None = None, omega: float = 0.5,
                          seed: int = 0, W=None, start: np.ndarray | None = None) -> np.ndarray:
    """``(n, vectors)`` coordinates whose differences measure how loosely two blocks connect.

    Random vectors smoothed by Jacobi over-relaxation on the clique-expansion graph, each
    rescaled to [0, 1] after every sweep; the algebraic distance of two blocks is the largest
    difference of their coordinates (Chen, Safro, SIAM J. Sci. Comput. 33(6), 2011).  Blocks
    in one tightly knit group end up close; blocks joined only by a net that also spans far
    parts of the design stay apart, so matching along it is avoided (the coarsening use:
    Safro, Sanders, Schulz, Proc. SEA 2012).
    """
    n = design.num_blocks
    vectors = ALG_VECTORS if vectors is None else vectors
    iterations = ALG_ITERATIONS if iterations is None else iterations
    if W is None:
        W = _weights(design, free, MAX_CLIQUE)
    W = sp.csr_array(W)
    deg = np.asarray(W.sum(axis=1)).ravel()
    on = np.flatnonzero(deg > 0)
    rng = np.random.default_rng(seed)
    X = (rng.random((n, vectors)) if start is None else np.array(start)).astype(np.float32)
    if not len(on):  # no edge at all (no nets, or only nets too large to expand): no smoothing
        return X
    # single precision: the coordinates only rank neighbours, and the sweeps are memory-bound
    Won = sp.csr_array(W[on][:, on], dtype=np.float32)
    dinv = (omega / deg[on]).astype(np.float32)[:, None]
    Y = X[on]
    for _ in range(iterations):
        Y = (1.0 - omega) * Y + (Won @ Y) * dinv
        lo, hi = Y.min(axis=0), Y.max(axis=0)
        Y = (Y - lo) / np.where(hi > lo, hi - lo, 1.0)
    X[on] = Y
    return X


def coarsen_level(design: Design, fp: Floorplan, max_area: float, *, seed: int = 0,
                  max_degree: int = MAX_CLIQUE, rounds: int = ROUNDS,
                  coords: np.ndarray | None = None, W=None) -> np.ndarray:
    """One level of matching.

    ``coords`` (:func:`algebraic_coordinates`, optional) divide each pair's score by
    ``ALG_EPS + `` their algebraic distance.

    Returns
    -------
    (n,) int64
        The group leader of every block (a leader leads itself); non-free blocks lead
        themselves.  No group's area exceeds ``max_area`` unless a single block does.
    """
    n = design.num_blocks
    free = _free_mask(design, fp)
    area = design.width * design.height
    leader = np.arange(n, dtype=np.int64)
    if W is None:
        W = _weights(design, free, max_degree)
    if not W.nnz:
        return leader
    rows, cols, wt = W.row.astype(np.int64), W.col.astype(np.int64), W.data
    # a symmetric tie-break, so that equal scores still give mutual choices
    lo, hi = np.minimum(rows, cols), np.maximum(rows, cols)
    h = ((lo * 2654435761 + hi * 40503 + seed * 97) % 1000003) / 1000003.0
    score = wt / (area[rows] + area[cols]) * (1.0 + 1e-6 * h)
    if coords is not None:
        dist = np.zeros(len(rows), np.float32)
        for r in range(coords.shape[1]):
            np.maximum(dist, np.abs(coords[rows, r] - coords[cols, r]), out=dist)
        score = score / (ALG_EPS + dist)
    matched = ~free
    for _ in range(rounds):
        ok = ~matched[rows] & ~matched[cols] & (area[rows] + area[cols] <= max_area)
        rows, cols, score = rows[ok], cols[ok], score[ok]
        if not len(rows):
            break
        best = _best(rows, cols, score, n)
        has = best >= 0
        mutual = np.flatnonzero(has & (best[np.maximum(best, 0)] == np.arange(n))
                                & (np.arange(n) < best))
        if not len(mutual):
            break
        leader[best[mutual]] = mutual
        matched[mutual] = True
        matched[best[mutual]] = True
    # blocks left alone join the pair they like best, while its area allows
    gsize = np.bincount(leader, weights=area, minlength=n)
    rows, cols, wt = W.row.astype(np.int64), W.col.astype(np.int64), W.data
    if coords is not None:
        wt = wt / (ALG_EPS + dist)
    lone = free & ~matched
    ok = lone[rows] & matched[cols] & free[cols]
    rows, cols, wt = rows[ok], cols[ok], wt[ok]
    if len(rows):
        g = leader[cols]
        ok = area[rows] + gsize[g] <= max_area
        rows, g, wt = rows[ok], g[ok], wt[ok]
        sc = wt / (area[rows] + gsize[g])
        best = _best(rows, g, sc, n)
        j = np.flatnonzero(best >= 0)
        if len(j):
            tgt = best[j]
            order = np.argsort(tgt, kind="stable")  # j ascending within a target
            j, tgt = j[order], tgt[order]
            cum = np.cumsum(area[j])
            first = np.r_[True, tgt[1:] != tgt[:-1]]
            base = np.maximum.accumulate(np.where(first, cum - area[j], 0.0))
            fits = gsize[tgt] + (cum - base) <= max_area
            leader[j[fits]] = tgt[fits]
    return leader


def _merge_parallel(net, pb, dx, dy, kept, weight, nc):
    """Two-pin nets between the same two blocks, both pins at the blocks' centres, become one
    net weighing their sum (the quadratic model is unchanged; a clustered netlist has many:
    fewer rows to build on every solve).  Pins must be grouped by net, nets numbered 0..m-1;
    returns the arrays without the merged-away nets (each kept net remembers its first
    origin in ``kept``)."""
    m = len(kept)
    deg = np.bincount(net, minlength=m)
    first = np.concatenate([[0], np.cumsum(deg)[:-1]])
    off = np.bincount(net, weights=(dx != 0) | (dy != 0), minlength=m)
    cand = np.flatnonzero((deg == 2) & (off == 0))
    if len(cand) < 2:
        return net, pb, dx, dy, kept, weight
    a, b = pb[first[cand]], pb[first[cand] + 1]
    key = np.minimum(a, b) * nc + np.maximum(a, b)
    order = np.argsort(key, kind="stable")
    ks = key[order]
    head = np.r_[True, ks[1:] != ks[:-1]]
    srt = cand[order]
    rep = srt[np.flatnonzero(head)][np.cumsum(head) - 1]   # the first net of each group
    weight = weight.copy()
    dup = ~head
    np.add.at(weight, rep[dup], weight[srt[dup]])
    alive = np.ones(m, bool)
    alive[srt[dup]] = False
    on = alive[net]
    new_id = np.cumsum(alive) - 1
    return (new_id[net[on]], pb[on], dx[on], dy[on], kept[alive], weight[alive])


def contract(design: Design, fp: Floorplan, leader: np.ndarray, level: int
             ) -> tuple[Design, np.ndarray, np.ndarray]:
    """The clustered design of one level, the parent map (fine block → coarse block) and the
    fine net each coarse net comes from (the first one, where parallel two-pin nets were
    merged into one of their summed weight)."""
    n = design.num_blocks
    roots = leader == np.arange(n)
    cid = np.cumsum(roots) - 1
    parent = cid[leader].astype(np.int64)
    nc = int(roots.sum())
    counts = np.bincount(parent, minlength=nc)
    area = design.width * design.height
    carea = np.bincount(parent, weights=area, minlength=nc)
    rep = np.flatnonzero(roots)                 # the leader block of every coarse block
    merged = counts > 1
    kind = design.kind[rep].copy()
    # a movable cell left on its own is a cluster of one here: the clustered design has no
    # standard cells to put on rows, and its pins sit at its centre like every cluster's
    soft = merged | ((kind == CELL) & (fp.status[rep] == MOVABLE))
    kind[soft] = CLUSTER
    side = np.sqrt(carea)
    width = np.where(merged, side, design.width[rep])
    height = np.where(merged, side, design.height[rep])
    halo = design.halo[rep].copy()
    halo[soft] = 0.0
    allowed = design.orient_allowed[rep].copy()
    allowed[soft] = 1
    names = [design.names[i] if not merged[k] else f"~L{level}.{k}"
             for k, i in enumerate(rep)]
    btype = None
    if design.block_type is not None:
        btype = [design.block_type[i] if not merged[k] else "cluster"
                 for k, i in enumerate(rep)]
    # pins: cluster pins at the cluster centre, one per (net, cluster)
    pb = parent[design.pin_block]
    single = ~soft[pb]
    dx = np.where(single, design.pin_dx, 0.0)
    dy = np.where(single, design.pin_dy, 0.0)
    net = np.repeat(np.arange(design.num_nets, dtype=np.int64), np.diff(design.net_start))
    key = net * nc + pb
    order = np.argsort(key, kind="stable")
    ks = key[order]
    dup = np.zeros(len(ks), bool)
    dup[1:] = (ks[1:] == ks[:-1]) & ~single[order[1:]]
    keep = np.sort(order[~dup])
    net, pb, dx, dy = net[keep], pb[keep], dx[keep], dy[keep]
    # nets that now touch one block only are gone
    ukey = _unique_sorted(net * nc + pb)
    nblk = np.bincount(ukey // nc, minlength=design.num_nets)
    live = nblk >= 2
    on = live[net]
    net, pb, dx, dy = net[on], pb[on], dx[on], dy[on]
    kept_nets = np.flatnonzero(live)
    weight = design.net_weight[kept_nets]
    net = np.cumsum(live)[net] - 1  # renumbered 0..kept-1
    net, pb, dx, dy, kept_nets, weight = _merge_parallel(net, pb, dx, dy, kept_nets, weight,
                                                         nc)
    deg = np.bincount(net, minlength=len(kept_nets))
    start = np.concatenate([[0], np.cumsum(deg)]).astype(np.int64)
    net_names = list(map(design.net_names.__getitem__, kept_nets.tolist()))
    rows = {"x": design.row_x, "y": design.row_y, "height": design.row_height,
            "site_width": design.row_site_width, "num_sites": design.row_num_sites,
            "orient": design.row_orient, "site_name": design.site_name}
    cx, cy = fp.centres()
    ccx = np.bincount(parent, weights=cx * area, minlength=nc) / np.maximum(carea, 1e-300)
    ccy = np.bincount(parent, weights=cy * area, minlength=nc) / np.maximum(carea, 1e-300)
    x = np.where(merged, ccx - side / 2, fp.x[rep])
    y = np.where(merged, ccy - side / 2, fp.y[rep])
    orient = np.where(merged, 0, fp.orient[rep])
    status = np.where(merged, MOVABLE, fp.status[rep])
    reg = design.regions  # a cluster's region is its members' (they share one: _weights)
    member = np.full(nc, -1, np.int32)
    member[parent] = reg.member
    regions = CellRegions(reg.names, reg.kind, reg.rect_start, reg.rects, member, reg.groups)
    d = Design(f"{design.name}~L{level}", design.die, names, kind, width, height, start, pb,
               dx, dy, halo=halo, orient_allowed=allowed, net_names=net_names,
               net_weight=weight, rows=rows,
               grid_pitch=design.grid_pitch, grid_origin=design.grid_origin,
               blockages=design.blockages,
               blockage_max_density=design.blockage_max_density, regions=regions,
               block_type=btype, x=x, y=y,
               orient=orient, status=status, dbu=design.dbu, validate=False, source=design.source)
    d.power = design.power  # (macros keep their names, which the grid's macro rings use)
    return d, parent, kept_nets


def coarsen(design: Design, floorplan: Floorplan | None = None, *, target_blocks: int = 20000,
            max_cluster_share: float = 0.002, seed: int = 0, max_levels: int = 20,
            max_pins: int | None = None) -> Clustering:
    """Coarsen ``design`` level by level until at most ``target_blocks`` movable cells and
    clusters remain (or a level no longer shrinks the design by 10 %).

    Parameters
    ----------
    design : Design
    floorplan : Floorplan, optional
        Statuses (PINNED and FIXED blocks never merge) and the positions clusters start from.
    target_blocks : int
        Stop when the clustered design has at most this many movable cells and clusters
        (terminals, macros, pinned and fixed blocks are not counted: they never merge).
    max_cluster_share : float
        Area bound of a cluster as a share of the core area (keeps clusters small next to the
        density bins and the macros).
    seed : int
        Seeds the tie-break of equal scores.
    max_pins : int, optional
        Keep coarsening (into fewer, larger clusters, down to :data:`MIN_TARGET` or a quarter
        of ``target_blocks``) while the clustered netlist has more pins than this: what an
        interactive refine costs grows with the pins.

    Returns
    -------
    Clustering
    """
    fp = design.initial if floorplan is None else floorplan
    c = design.core
    core_area = float((c[2] - c[0]) * (c[3] - c[1]))
    movable = (fp.status == MOVABLE) & (design.kind != TERMINAL)
    mov_area = float(np.sum(design.width[movable] * design.height[movable]))
    # clusters of about equal area at the target count, bounded by the share of the core
    designs, parents, nets = [design], [], []
    coords = None
    cur, cur_fp = design, fp
    for level in range(1, max_levels + 1):
        free = _free_mask(cur, cur_fp)
        nfree = int(free.sum())
        want = target_blocks
        if max_pins is not None and cur.num_pins > max_pins:  # fewer, larger clusters
            floor = min(MIN_TARGET, target_blocks // 4)
            want = min(want, max(int(nfree * max_pins / cur.num_pins), floor))
        if not nfree or nfree <= want:
            break
        # area bound: what the target count asks for, at least twice the largest free block
        amax = max(2.0 * mov_area / max(want, 1), 1e-12)
        amax = min(amax, max_cluster_share * core_area)
        amax = max(amax, 2.0 * float(np.max(cur.width[free] * cur.height[free])))
        # algebraic coordinates, smoothed further on every level from the members' mean
        W = _weights(cur, free, MAX_CLIQUE)
        if not W.nnz:  # no net joins two free blocks: nothing to match on
            break
        coords = algebraic_coordinates(cur, free, seed=seed, W=W, start=coords)
        leader = coarsen_level(cur, cur_fp, amax, seed=seed + level, coords=coords, W=W)
        left = np.count_nonzero(free & (leader == np.arange(cur.num_blocks)))
        if left > MIN_SHRINK * nfree:
            break
        nxt, par, kept = contract(cur, cur_fp, leader, level)
        # a cluster's coordinates: the area-weighted mean of its members'
        a = cur.width * cur.height
        ca = np.bincount(par, weights=a, minlength=nxt.num_blocks)
        nb = nxt.num_blocks
        coords = np.stack([np.bincount(par, weights=coords[:, r] * a, minlength=nb)
                           for r in range(coords.shape[1])], axis=1)
        coords = (coords / np.maximum(ca, 1e-300)[:, None]).astype(np.float32)
        designs.append(nxt)
        parents.append(par)
        nets.append(kept)
        cur, cur_fp = nxt, nxt.initial
    return Clustering(designs, parents, nets)
