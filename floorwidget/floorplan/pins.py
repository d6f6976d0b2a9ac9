"""I/O pin assignment: legal slots on the die edges and pins assigned to them for wirelength.

Slots
    Each routing layer has slots on the die edges its tracks cross: a horizontal-track layer on
    the left and right edges, a vertical-track layer on the bottom and top edges.  Slots lie on
    the layer's track grid through the die's lower-left corner (``k × pitch``, the pitch from
    ``design.routing_layers``; the DEF ``TRACKS`` starts are not read), spaced by a whole
    number of pitches at least as wide as the widest pin shape put on them, so two pins on one
    layer never overlap (pins on different layers may share a place along an edge).  A pin
    whose layer the input names (DEF ``PINS + LAYER``, ``design.io_layers``) keeps it and so
    the edges its direction allows; any other pin takes the edge's default layer: the lowest
    horizontal-track layer above the lowest layer on the left and right edges, the lowest
    such vertical-track layer on the bottom and top (our choice; the lowest layer serves the
    cells' own pins).  A corner keep-out, measured along each edge from both corners, holds
    no slot.  The pin shape stays inside the die and touches the edge.

Assignment
    Pins and slots are a linear assignment problem (Kuhn, Naval Research Logistics Quarterly,
    1955; solved by :func:`scipy.optimize.linear_sum_assignment`): the cost of pin ``p`` in
    slot ``s`` is the (weighted) HPWL of ``p``'s nets with ``p`` at ``s`` and every other pin
    where the floorplan has it.  The matrix is kept small without losing exactness: each pin
    keeps only its ``n`` cheapest slots (``n`` the number of pins competing for them), and
    some optimal assignment uses only those (a pin outside them can move to one left free at
    no extra cost); the costs of every slot are evaluated (cheap, vectorised), only the
    assignment sees the reduced matrix.  Pins that share no slot pool are solved as separate
    problems (in practice one per layer).  :func:`assign_pins_iterated`
    alternates the assignment with placement (assign, place, assign ...).

Constraints (:class:`PinConstraints`)
    Pin groups by name pattern (``*`` any text, ``?`` one character, everything else literal,
    so ``axi_req_o[*]`` is a bus) with allowed edges, a range along the edge (die
    coordinates, µm: x on the bottom and top, y on the left and right; the pin's centre stays
    in it) and bit order (along each edge, higher bits at higher coordinates); the corner
    keep-out; pins held by name.  Pins pinned or fixed in the floorplan are held too, and a
    pin on no net stays where it is.  Held pins occupy the slots their shapes touch.

The figures are early-floorplanning estimates: pin legality against the full rule deck
(spacing, minimum area, mask colours) belongs to the implementation flow's checks.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import linear_sum_assignment
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import connected_components

from ..design import MOVABLE, TERMINAL, Design, DesignError, Floorplan, orient_offsets
from ..kernels.io_pins import EDGE_DIR, EDGES, edge_layers, nearest_edge

__all__ = ["EDGES", "PinConstraints", "PinGroup", "SlotPool", "assign_pins",
           "assign_pins_iterated", "pin_cost_matrix", "pin_edge", "slot_pools", "snap_pin"]

_ALONG_X = np.array([False, True, False, True])  # bottom and top run along x
_EDGE_DIR = EDGE_DIR
_BIG = 1e30  # a forbidden (pin, slot) entry
_CHUNK = 4_000_000  # pins x slots evaluated at once when choosing candidates
_EPS = 1e-9


@dataclass(frozen=True)
class PinGroup:
    """Pins whose names match ``pattern`` and where they may go.

    Parameters
    ----------
    pattern : str
        ``*`` matches any text, ``?`` one character; everything else is literal
        (``"axi_req_o[*]"`` matches the bits of a bus).
    edges : sequence of str
        Allowed edges among :data:`EDGES` (empty: any edge the pin's layer allows).
    span : (lo, hi), optional
        Range along the edge (die coordinates, µm) the pin centres stay in.
    ordered : bool
        Keep bit order: along each edge, a pin with a higher index (the last number in its
        name) sits at a higher coordinate.
    """

    pattern: str
    edges: tuple[str, ...] = ()
    span: tuple[float, float] | None = None
    ordered: bool = False

    def __post_init__(self):
        object.__setattr__(self, "edges", tuple(self.edges))
        bad = [e for e in self.edges if e not in EDGES]
        if bad or not isinstance(self.pattern, str) or not self.pattern:
            raise DesignError(f"pin group {self.pattern!r}: edges must be among "
                              f"{', '.join(EDGES)} and the pattern not empty (got edges "
                              f"{list(self.edges)})", where=f"pin group {self.pattern!r}")
        if self.span is not None:
            lo, hi = (float(v) for v in self.span)
            if not (np.isfinite(lo) and np.isfinite(hi) and hi > lo):
                raise DesignError(f"pin group {self.pattern!r}: span {list(self.span)} must "
                                  "be two finite numbers, low < high",
                                  where=f"pin group {self.pattern!r}")
            object.__setattr__(self, "span", (lo, hi))

    def regex(self) -> re.Pattern:
        return re.compile("".join(".*" if c == "*" else "." if c == "?" else re.escape(c)
                                  for c in self.pattern), re.DOTALL)

    def to_dict(self) -> dict:
        """Plain description (as :meth:`PinConstraints.from_plain` takes)."""
        return {"pattern": self.pattern, "edges": list(self.edges),
                "span": None if self.span is None else list(self.span),
                "ordered": self.ordered}


@dataclass(frozen=True)
class PinConstraints:
    """What the engineer asks of the pin assignment.

    Parameters
    ----------
    groups : sequence of PinGroup
        The first group whose pattern matches a pin applies to it.
    corner_keepout : float, optional
        µm along each edge from both corners without slots (default: 1 % of the shorter die
        side; our default).
    held : sequence of str
        Pins kept where they are (besides pinned and fixed ones).
    """

    groups: tuple[PinGroup, ...] = ()
    corner_keepout: float | None = None
    held: tuple[str, ...] = field(default=())

    def __post_init__(self):
        object.__setattr__(self, "groups", tuple(self.groups))
        object.__setattr__(self, "held", tuple(self.held))
        k = self.corner_keepout
        if k is not None and not (np.isfinite(k) and k >= 0):
            raise DesignError(f"corner keep-out {k!r} must be a finite number >= 0 µm",
                              where="corner_keepout")

    @classmethod
    def from_plain(cls, groups: Iterable[dict] | None = None,
                   corner_keepout: float | None = None,
                   held: Iterable[str] = ()) -> PinConstraints:
        """From plain values: ``groups`` as ``{"pattern", "edges", "span", "ordered"}``."""
        gs = []
        for k, g in enumerate(groups or ()):
            if isinstance(g, PinGroup):
                gs.append(g)
                continue
            if not isinstance(g, dict) or "pattern" not in g or set(g) - {
                    "pattern", "edges", "span", "ordered"}:
                raise DesignError(f"pin group {k}: expected an object with 'pattern' and "
                                  f"optionally 'edges', 'span', 'ordered'; got {g!r}",
                                  where=f"pin group {k}")
            gs.append(PinGroup(g["pattern"], tuple(g.get("edges") or ()), g.get("span"),
                               bool(g.get("ordered", False))))
        return cls(tuple(gs), corner_keepout, tuple(held))

    def keepout(self, design: Design) -> float:
        if self.corner_keepout is not None:
            return float(self.corner_keepout)
        d = design.die
        return 0.01 * float(min(d[2] - d[0], d[3] - d[1]))


@dataclass
class SlotPool:
    """The slots of one layer on one edge: centre coordinates along the edge, µm."""

    layer: str
    edge: int
    pitch: float
    step: float
    width: float
    pos: np.ndarray


# --- layers and edges -------------------------------------------------------------------------
def _layer_table(design: Design) -> tuple[dict[str, tuple[str, float]], tuple[str, str]]:
    """``{layer: (direction, pitch)}`` and the default layers ``(H, V)`` for unnamed pins."""
    layers = [(n, d, float(p)) for n, d, p in design.routing_layers if p > 0]
    table = {n: (d, p) for n, d, p in layers}
    default = []
    for want, pick in zip(("H", "V"), edge_layers(layers)):
        if pick is None:  # no layer data: an assumed layer, as the congestion figures do
            from ..metrics.congestion import ASSUMED_TRACKS  # noqa: PLC0415

            unit = (float(np.median(design.row_height)) if len(design.row_height)
                    else 0.01 * float(min(design.die[2] - design.die[0],
                                          design.die[3] - design.die[1])))
            pick = f"(assumed {want})"
            table[pick] = (want, unit / ASSUMED_TRACKS)
        default.append(pick)
    return table, (default[0], default[1])


def pin_edge(design: Design, fp: Floorplan, idx) -> np.ndarray:
    """Index into :data:`EDGES` of the die edge nearest each block centre in ``idx``."""
    idx = np.asarray(idx, dtype=np.intp)
    cx, cy = fp.centres()
    return nearest_edge(design.die, cx[idx], cy[idx])


def _io_layers(design: Design) -> dict[str, str]:
    """``design.io_layers`` (empty for a design pickled before it existed)."""
    return getattr(design, "io_layers", None) or {}


def _pin_layers(design: Design, table, default, idx) -> tuple[list[str | None], np.ndarray]:
    """Per pin: its own layer (None when it takes the edge's default) and ``(p, 4)`` the
    edges that layer allows."""
    own: list[str | None] = []
    for i in np.asarray(idx).tolist():  # I/O pins: thousands at most
        nm = _io_layers(design).get(design.names[i])
        own.append(nm if nm in table else None)
    allow = np.ones((len(own), 4), bool)
    for k, nm in enumerate(own):
        if nm is not None:
            allow[k] = [table[nm][0] == e for e in _EDGE_DIR]
    return own, allow


def _along_width(w, h, edge) -> np.ndarray:
    """Extent of a shape along the edge (w on bottom and top, h on left and right)."""
    return np.where(_ALONG_X[edge], w, h)


def slot_pools(design: Design, widths: dict[tuple[str, int], float] | None = None,
               keepout: float = 0.0, layers: Iterable[tuple[str, int]] | None = None
               ) -> dict[tuple[str, int], SlotPool]:
    """The slots of each ``(layer, edge)`` pool.

    Parameters
    ----------
    design : Design
    widths : dict, optional
        Widest pin shape along the edge per pool (default 0: a slot per track).
    keepout : float
        µm from both corners of every edge without slots.
    layers : iterable of (layer, edge), optional
        The pools wanted (default: every routing layer on the two edges its tracks cross).

    Returns
    -------
    dict
        ``(layer, edge) -> SlotPool``; slot centres at ``k × step`` from the die's low corner
        along the edge, ``step`` the smallest multiple of the pitch at least the width, the
        whole shape inside ``[low + keepout, high - keepout]``.
    """
    table, _ = _layer_table(design)
    if layers is None:
        layers = [(nm, e) for nm, (dr, _) in table.items() for e in range(4)
                  if _EDGE_DIR[e] == dr and not nm.startswith("(assumed")]
    d = design.die
    out = {}
    for nm, e in layers:
        pitch = table[nm][1]
        w = float((widths or {}).get((nm, e), 0.0))
        step = pitch * max(1.0, np.ceil(w / pitch - 1e-6))
        lo, hi = (d[0], d[2]) if _ALONG_X[e] else (d[1], d[3])
        k0 = np.ceil((keepout + w / 2) / step - 1e-6)
        k1 = np.floor((hi - lo - keepout - w / 2) / step + 1e-6)
        pos = lo + np.arange(k0, k1 + 1) * step if k1 >= k0 else np.zeros(0)
        out[(nm, e)] = SlotPool(nm, e, pitch, float(step), w, pos)
    return out


# --- the problem --------------------------------------------------------------------------------
def _bit_index(name: str) -> int:
    m = re.findall(r"\d+", name)
    return int(m[-1]) if m else -1


@dataclass
class _Pins:
    idx: np.ndarray  # terminal block indices to assign
    own: list  # own layer or None
    allow: np.ndarray  # (p, 4) edges allowed
    span: np.ndarray  # (p, 2) range along the edge
    group: np.ndarray  # group index or -1
    held: np.ndarray  # terminal block indices held in place
    patterns: list  # group patterns, for messages


def _select(design: Design, fp: Floorplan, cons: PinConstraints, table, default) -> _Pins:
    term = np.flatnonzero(design.kind == TERMINAL)
    on_net = np.zeros(design.num_blocks, bool)
    on_net[design.pin_block] = True
    held_names = set(cons.held)
    unknown = held_names - {design.names[i] for i in term.tolist()}
    if unknown:
        nm = sorted(unknown)[0]
        raise DesignError(f"held pin {nm!r}: no I/O pin of that name in design "
                          f"{design.name!r}", where=f"pin {nm!r}")
    names = [design.names[i] for i in term.tolist()]
    by_hand = np.array([nm in held_names for nm in names], bool)
    free = (fp.status[term] == MOVABLE) & on_net[term] & ~by_hand
    idx, held = term[free], term[~free]
    own, allow = _pin_layers(design, table, default, idx)
    d = design.die
    span = np.tile([-np.inf, np.inf], (len(idx), 1))
    group = np.full(len(idx), -1, np.int64)
    free_names = [design.names[i] for i in idx.tolist()]
    for g, grp in enumerate(cons.groups):
        rx = grp.regex()
        hit = np.array([rx.fullmatch(nm) is not None for nm in free_names], bool)
        if not hit.any():
            if any(rx.fullmatch(nm) for nm in names):
                continue  # only held pins: nothing to place
            raise DesignError(f"pin group {grp.pattern!r} matches no I/O pin of design "
                              f"{design.name!r}", where=f"pin group {grp.pattern!r}")
        hit &= group < 0  # the first matching group applies
        group[hit] = g
        if grp.edges:
            mask = np.array([e in grp.edges for e in EDGES], bool)
            allow[hit] &= mask
        if grp.span is not None:
            span[hit] = grp.span
            lo, hi = grp.span
            for e in np.flatnonzero(allow[hit].any(axis=0)):
                a, b = (d[0], d[2]) if _ALONG_X[e] else (d[1], d[3])
                if hi < a or lo > b:
                    raise DesignError(f"pin group {grp.pattern!r}: span {[lo, hi]} lies off "
                                      f"the {EDGES[e]} edge ({a:g} to {b:g} µm)",
                                      where=f"pin group {grp.pattern!r}")
        none = hit & ~allow.any(axis=1)
        if none.any():
            nm = free_names[int(np.flatnonzero(none)[0])]
            raise DesignError(f"pin group {grp.pattern!r}: pin {nm!r} on layer "
                              f"{own[int(np.flatnonzero(none)[0])]} cannot reach edges "
                              f"{', '.join(grp.edges)} (its tracks cross the others)",
                              where=f"pin group {grp.pattern!r}")
    return _Pins(idx, own, allow, span, group, held, [g.pattern for g in cons.groups])


def _layer_at(own, default, e: int) -> list[str]:
    return [nm if nm is not None else default[0 if _EDGE_DIR[e] == "H" else 1] for nm in own]


def _net_boxes(design: Design, fp: Floorplan, idx: np.ndarray):
    """Per connection of a pin in ``idx`` to a net: the pin's row, the net's weight, the pin
    offset (oriented) and the box of the net's other pins (inf when there are none)."""
    rows = np.full(design.num_blocks, -1, np.int64)
    rows[idx] = np.arange(len(idx))
    conn = np.flatnonzero(rows[design.pin_block] >= 0)
    pin_net = design.pin_net
    net = pin_net[conn]
    st = design.net_start
    deg = st[net + 1] - st[net]
    total = int(deg.sum())
    local = np.cumsum(deg) - deg
    allp = np.repeat(st[net] - local, deg) + np.arange(total)
    owner = np.repeat(design.pin_block[conn], deg)
    px, py = fp.pin_positions()
    other = design.pin_block[allp] != owner
    bounds = []
    for v, fill in ((px, np.inf), (px, -np.inf), (py, np.inf), (py, -np.inf)):
        vals = np.where(other, v[allp], fill)
        red = np.minimum if fill > 0 else np.maximum
        bounds.append(red.reduceat(vals, local) if total else np.zeros(0))
    b = design.pin_block[conn]
    ox, oy = orient_offsets(design.pin_dx[conn], design.pin_dy[conn], fp.orient[b])
    return rows[b], design.net_weight[net], ox, oy, np.stack(bounds, axis=1)


def _centre_at(design: Design, fp: Floorplan, i, e, s):
    """Centre of terminal(s) ``i`` on edge(s) ``e`` at along-edge coordinate(s) ``s``."""
    w, h = fp.sizes()
    w, h = w[i], h[i]
    d = design.die
    e = np.asarray(e)
    cx = np.select([e == 0, e == 2], [d[0] + w / 2, d[2] - w / 2], s)
    cy = np.select([e == 1, e == 3], [d[1] + h / 2, d[3] - h / 2], s)
    return cx, cy


def _cost(boxes, cx, cy):
    """Weighted HPWL of each connection's net with its pin at ``(cx, cy)`` (broadcast)."""
    row, wt, ox, oy, bb = boxes
    sl = (slice(None),) + (None,) * (np.ndim(cx) - 1)
    x, y = cx + ox[sl], cy + oy[sl]
    lo_x, hi_x, lo_y, hi_y = (bb[:, k][sl] for k in range(4))
    c = (np.maximum(hi_x, x) - np.minimum(lo_x, x)) + (np.maximum(hi_y, y) - np.minimum(lo_y, y))
    return np.where(np.isfinite(lo_x), c, 0.0) * wt[sl]


def pin_cost_matrix(design: Design, fp: Floorplan, idx, edges, pos) -> np.ndarray:
    """Cost of each pin ``idx[p]`` at each slot ``(edges[s], pos[s])``: the weighted HPWL of
    its nets with it there and every other pin where ``fp`` has it.  ``(p, s)``."""
    idx = np.asarray(idx, np.int64)
    boxes = _net_boxes(design, fp, idx)
    return _pin_costs(design, fp, boxes, idx, np.arange(len(idx)), edges, pos)


def _pin_costs(design, fp, boxes, idx, rows, edges, pos) -> np.ndarray:
    """:func:`pin_cost_matrix` for the pins ``idx[rows]`` from the connections ``boxes`` of
    every pin in ``idx`` (:func:`_net_boxes`)."""
    row, wt, ox, oy, bb = boxes
    local = np.full(len(idx), -1, np.int64)
    local[rows] = np.arange(len(rows))
    sel = np.flatnonzero(local[row] >= 0)
    edges = np.broadcast_to(np.asarray(edges, np.int64), np.shape(pos))
    pos = np.asarray(pos, np.float64)
    cx, cy = _centre_at(design, fp, idx[row[sel]][:, None], edges[None, :], pos[None, :])
    per = _cost((row[sel], wt[sel], ox[sel], oy[sel], bb[sel]), cx, cy)
    agg = csr_matrix((np.ones(len(sel)), (local[row[sel]], np.arange(len(sel)))),
                     shape=(len(rows), len(sel)))
    return np.asarray(agg @ per)


# --- the assignment -----------------------------------------------------------------------------
def assign_pins(design: Design, floorplan: Floorplan | None = None,
                constraints: PinConstraints | None = None) -> Floorplan:
    """Assign the movable I/O pins to legal slots on the die edges for least wirelength.

    Parameters
    ----------
    design : Design
    floorplan : Floorplan, optional
        Where everything else is (default ``design.initial``); not modified.
    constraints : PinConstraints, optional

    Returns
    -------
    Floorplan
        A copy with the assigned pins moved (their orientation kept); every other block
        bit for bit as given.  ``info["pins"]`` holds ``assigned`` (count), ``cost_before``
        and ``cost_after`` (the weighted HPWL of the nets of the assigned pins, each
        connection counted with the other pins as placed).

    Raises
    ------
    DesignError
        One line naming the pin group (or the layer) whose pins cannot all get a slot, a
        pattern that matches no pin, a held pin that does not exist.

    Examples
    --------
    >>> fp = assign_pins(design, design.initial,
    ...                  PinConstraints([PinGroup("axi_req_o[*]", ["top"], ordered=True)]))
    ... # doctest: +SKIP
    """
    fp = design.initial if floorplan is None else floorplan
    cons = constraints or PinConstraints()
    table, default = _layer_table(design)
    pins = _select(design, fp, cons, table, default)
    out = fp.copy()
    out.info = dict(fp.info)
    n = len(pins.idx)
    if n == 0:
        out.info["pins"] = {"assigned": 0, "cost_before": 0.0, "cost_after": 0.0}
        return out
    w, h = fp.sizes()
    keys, member = _pool_members(pins, default)
    widths = {}
    for k, key in enumerate(keys):
        wa = _along_width(w[pins.idx], h[pins.idx], key[1])[member[:, k]]
        widths[key] = float(wa.max())
    pools = slot_pools(design, widths, cons.keepout(design), keys)
    _remove_held(design, fp, pools, pins.held, table, default)
    nk = len(keys)
    pr, pk = np.nonzero(member)
    _, comp = connected_components(csr_matrix(
        (np.ones(len(pr)), (pr, n + pk)), shape=(n + nk, n + nk)), directed=False)
    boxes = _net_boxes(design, fp, pins.idx)
    edge_of, pos_of = np.empty(n, np.int64), np.empty(n)
    for c in np.unique(comp[:n]).tolist():  # independent problems (one per layer, say)
        rows = np.flatnonzero(comp[:n] == c)
        ks = np.flatnonzero(comp[n:] == c)
        e_c, s_c = _solve(design, fp, pins, rows, ks, keys, member, pools, boxes)
        edge_of[rows], pos_of[rows] = e_c, s_c
    _order_groups(design, cons, pins, edge_of, pos_of, pools, default)
    cx, cy = _centre_at(design, fp, pins.idx, edge_of, pos_of)
    c0x, c0y = fp.centres()
    before = _total(boxes, c0x[pins.idx], c0y[pins.idx])
    out.x[pins.idx] = cx - w[pins.idx] / 2
    out.y[pins.idx] = cy - h[pins.idx] / 2
    out.info["pins"] = {"assigned": n, "cost_before": before,
                        "cost_after": _total(boxes, cx, cy)}
    return out


def _pool_members(pins: _Pins, default) -> tuple[list[tuple[str, int]], np.ndarray]:
    """The ``(layer, edge)`` pools and ``(p, pools)`` which pin may use which."""
    keys: list[tuple[str, int]] = []
    cols = []
    for e in range(4):
        lay = np.array(_layer_at(pins.own, default, e), dtype=object)
        for nm in sorted(set(lay[pins.allow[:, e]].tolist())):
            keys.append((nm, e))
            cols.append(pins.allow[:, e] & (lay == nm))
    return keys, np.stack(cols, axis=1) if cols else np.zeros((len(pins.idx), 0), bool)


def _total(boxes, cx, cy) -> float:
    row = boxes[0]
    return float(_cost(boxes, cx[row], cy[row]).sum())


def _remove_held(design, fp, pools, held, table, default) -> None:
    """Drop the slots a held pin's shape touches (same layer, its nearest edge)."""
    if len(held) == 0:
        return
    edge = pin_edge(design, fp, held)
    own, _ = _pin_layers(design, table, default, held)
    w, h = fp.sizes()
    cx, cy = fp.centres()
    along = np.where(_ALONG_X[edge], cx[held], cy[held])
    half = _along_width(w[held], h[held], edge) / 2
    lay = np.array([_layer_at([o], default, e)[0] for o, e in zip(own, edge.tolist())],
                   dtype=object)
    for key, pool in pools.items():
        sel = (edge == key[1]) & (lay == key[0])
        if not sel.any() or not len(pool.pos):
            continue
        # a slot is taken when it lies strictly inside some held shape widened by half the
        # pool's pin: sort the intervals by their low end, keep the running maximum high end
        lo = along[sel] - half[sel] - pool.width / 2
        hi = along[sel] + half[sel] + pool.width / 2
        order = np.argsort(lo)
        lo, reach = lo[order], np.maximum.accumulate(hi[order])
        k = np.searchsorted(lo, pool.pos - _EPS, side="left")  # intervals with lo < pos - eps
        taken = (k > 0) & (reach[np.maximum(k - 1, 0)] > pool.pos + _EPS)
        pool.pos = pool.pos[~taken]


def _solve(design, fp, pins: _Pins, rows, ks, keys, member, pools, boxes):
    """One independent problem: pins ``rows`` and the pools ``ks`` they share; ``(edge,
    coordinate)`` of each."""
    n = len(rows)
    cand_k, cand_s = [], []
    for k in ks.tolist():
        pos, e = pools[keys[k]].pos, keys[k][1]
        use = rows[member[rows, k]]
        if not len(pos) or not len(use):
            continue
        # each pin's n cheapest slots of this pool within its span: if every pin may use its
        # n cheapest, some optimal assignment uses only those (a pin elsewhere can move to one
        # of them left free, at no extra cost), so the union of them is enough
        m = min(n, len(pos))
        step = max(1, _CHUNK // len(pos))
        for c0 in range(0, len(use), step):  # chunks keep the rows x slots array small
            r = use[c0:c0 + step]
            cost = _pin_costs(design, fp, boxes, pins.idx, r, e, pos)
            out = (pos[None, :] < pins.span[r, :1] - _EPS) \
                | (pos[None, :] > pins.span[r, 1:] + _EPS)
            cost[out] = np.inf
            take = np.unique(np.argpartition(cost, m - 1, axis=1)[:, :m])
            cand_k.append(np.full(len(take), k))
            cand_s.append(pos[take])
    if cand_s:  # a slot may be among several pins' cheapest
        uk = np.unique(np.stack([np.concatenate(cand_k), np.concatenate(cand_s)], 1), axis=0)
        cand_k, cand_s = [uk[:, 0].astype(np.int64)], [uk[:, 1]]
    ck = np.concatenate(cand_k) if cand_k else np.zeros(0, np.int64)
    cs = np.concatenate(cand_s) if cand_s else np.zeros(0)
    ce = np.array([keys[k][1] for k in range(len(keys))], np.int64)[ck]
    ok = member[rows][:, ck] & (cs[None, :] >= pins.span[rows, :1] - _EPS) \
        & (cs[None, :] <= pins.span[rows, 1:] + _EPS)
    if len(cs) < n:
        raise DesignError(_no_room(design, pins, rows, ks, keys, ok))
    cost = np.where(ok, _pin_costs(design, fp, boxes, pins.idx, rows, ce, cs), _BIG)
    r_i, c_i = linear_sum_assignment(cost)
    if (cost[r_i, c_i] >= _BIG).any():
        raise DesignError(_no_room(design, pins, rows, ks, keys, ok))
    e_out, s_out = np.empty(n, np.int64), np.empty(n)
    e_out[r_i], s_out[r_i] = ce[c_i], cs[c_i]
    return e_out, s_out


def _no_room(design, pins: _Pins, rows, ks, keys, ok) -> str:
    """One line: which group (or layer) has more pins than free slots."""
    layers = sorted({keys[k][0] for k in ks.tolist()})
    g = pins.group[rows]
    for gi in np.unique(g[g >= 0]).tolist():
        sel = g == gi
        nslots = int(ok[sel].any(axis=0).sum())
        if nslots < int(sel.sum()):
            return (f"pin group {pins.patterns[gi]!r}: {int(sel.sum())} pins but "
                    f"only {nslots} free slots on layer(s) {', '.join(layers)} within its "
                    "edges and span")
    return (f"{len(rows)} I/O pins on layer(s) {', '.join(layers)} but not enough free slots "
            "for all of them under the pin constraints (corner keep-out, held pins, groups)")


def _order_groups(design, cons: PinConstraints, pins: _Pins, edge_of, pos_of, pools,
                  default) -> None:
    """Put the bits of each ordered group in index order along every edge it uses.

    The group's own coordinates on the edge, sorted, are handed out bit by bit; a bit whose
    layer has no free slot there takes the next free slot of its layer further along (so a
    bus on one layer keeps exactly its slots).  In place on ``edge_of``/``pos_of``."""
    ordered = [g for g, grp in enumerate(cons.groups) if grp.ordered]
    if not ordered:
        return
    lay = {e: _layer_at(pins.own, default, e) for e in range(4)}
    used: dict[tuple[str, int], set] = {}
    for p in range(len(pins.idx)):  # I/O pins: thousands at most
        e = int(edge_of[p])
        used.setdefault((lay[e][p], e), set()).add(float(pos_of[p]))
    names = [design.names[i] for i in pins.idx.tolist()]
    for g in ordered:
        for e in range(4):
            rows = np.flatnonzero((pins.group == g) & (edge_of == e))
            if len(rows) < 2:
                continue
            rows = rows[np.argsort([_bit_index(names[r]) for r in rows], kind="stable")]
            coords = np.sort(pos_of[rows])
            for r in rows.tolist():
                used[(lay[e][r], e)].discard(float(pos_of[r]))
            prev = -np.inf
            for j, r in enumerate(rows.tolist()):
                key = (lay[e][r], e)
                pos = pools[key].pos
                free = pos[(pos >= max(coords[j], prev + _EPS) - _EPS)
                           & (pos <= pins.span[r, 1] + _EPS)]
                free = free[~np.isin(free, list(used[key]))][:1]
                if not len(free):
                    raise DesignError(f"pin group {pins.patterns[g]!r}: no room to keep its "
                                      f"bits in order on the {EDGES[e]} edge",
                                      where=f"pin group {pins.patterns[g]!r}")
                pos_of[r] = prev = float(free[0])
                used[key].add(prev)


def snap_pin(design: Design, fp: Floorplan, i: int, x: float, y: float) -> tuple[float, float]:
    """Where I/O pin ``i`` goes when asked for lower-left ``(x, y)``: the nearest free slot
    of its layer on the die edge nearest the requested centre (among the edges its layer
    allows), every other I/O pin where ``fp`` has it.  No corner keep-out applies: a hand
    move may go anywhere along the edge.

    Raises
    ------
    DesignError
        No free slot on any edge the pin's layer allows.
    """
    table, default = _layer_table(design)
    w, h = fp.sizes()
    wi, hi_ = float(w[i]), float(h[i])
    cx, cy = x + wi / 2, y + hi_ / 2
    d = design.die
    dist = np.array([cx - d[0], cy - d[1], d[2] - cx, d[3] - cy])
    own, allow = _pin_layers(design, table, default, [i])
    others = np.flatnonzero(design.kind == TERMINAL)
    others = others[others != i]
    best = None
    for e in np.argsort(np.abs(dist), kind="stable").tolist():
        if not allow[0, e]:
            continue
        key = (_layer_at(own, default, e)[0], e)
        pools = slot_pools(design, {key: float(_along_width(wi, hi_, e))}, 0.0, [key])
        _remove_held(design, fp, pools, others, table, default)
        pos = pools[key].pos
        if len(pos):
            t = cx if _ALONG_X[e] else cy
            best = (e, float(pos[np.argmin(np.abs(pos - t))]))
            break
    if best is None:
        raise DesignError(f"I/O pin {design.names[i]!r}: no free slot on the die edges its "
                          "layer reaches", where=f"block {design.names[i]!r}")
    ncx, ncy = _centre_at(design, fp, i, best[0], best[1])
    return float(ncx) - wi / 2, float(ncy) - hi_ / 2


def assign_pins_iterated(design: Design, floorplan: Floorplan | None = None,
                         constraints: PinConstraints | None = None, *, rounds: int = 2,
                         place: Callable[..., Floorplan] | None = None,
                         **place_options) -> Floorplan:
    """Alternate pin assignment and placement: assign, place, assign ... (``rounds`` of
    assign-and-place, then a last assignment against the last placement).

    Parameters
    ----------
    design, floorplan, constraints
        As :func:`assign_pins`.
    rounds : int
        Placements run (0: a single assignment).
    place : callable, optional
        ``place(design, floorplan, **place_options) -> Floorplan`` (default
        :func:`floorwidget.placer.place`, which never moves I/O pins).
    **place_options
        Passed to ``place``.

    Returns
    -------
    Floorplan
        ``info["pin_rounds"]`` lists the total HPWL after each assignment.
    """
    from ..metrics import hpwl  # noqa: PLC0415
    from ..placer import place as _place  # noqa: PLC0415

    run = place or _place
    fp = assign_pins(design, floorplan, constraints)
    trace = [hpwl(design, fp)]
    for _ in range(int(rounds)):
        fp = assign_pins(design, run(design, fp, **place_options), constraints)
        trace.append(hpwl(design, fp))
    fp.info["pin_rounds"] = trace
    return fp
