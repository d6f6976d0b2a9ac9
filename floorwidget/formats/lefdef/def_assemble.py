"""The :class:`~floorwidget.design.Design` a parsed DEF makes (:func:`assemble`, a part of the
DEF reader, :mod:`.def_reader`).

:func:`assemble` runs named steps, each a function of the parsed DEF and the steps before it:
the die and its blockages, the rows (and the core they span), the components, the I/O pins
as terminals, the net connections, the pin offsets from the LEF, the nets kept, and the
:class:`Design` they make (a validation error then names the file and the statement's line).
"""

from __future__ import annotations

import re
from itertools import repeat
from typing import NamedTuple

import numpy as np

from ...design import (
    CELL,
    FIXED,
    MOVABLE,
    PINNED,
    REGION_TYPES,
    TERMINAL,
    Design,
    DesignError,
    orient_size,
)
from ._common import (
    _MATS,
    _TERMINAL_PREFIX,
    _warn_skipped,
)
from .polygons import _polygon_rects


class _Components(NamedTuple):
    """The components in DEF order, with their LEF masters (``masters[model[i]]``)."""

    names: list
    models: list  # master name per component
    masters: list  # the LefMacro of each distinct master, in ``master_names`` order
    master_names: list
    model: np.ndarray  # index into ``masters`` per component
    kind: np.ndarray
    width: np.ndarray
    height: np.ndarray
    allowed: np.ndarray
    status: np.ndarray
    orient: np.ndarray
    x: np.ndarray  # µm
    y: np.ndarray
    halo: np.ndarray | None  # dbu


class _Terminals(NamedTuple):
    """The I/O pins as terminal blocks (named apart from a component of the same name)."""

    names: list
    w: list
    h: list
    x: list
    y: list
    orient: list
    status: list


class _Connections(NamedTuple):
    """Every net connection: its block (-1 when none), whether it is an I/O pin, and whether
    it is kept (not a MUSTJOIN net, not a ``( * pin )`` global connection)."""

    block: np.ndarray
    is_io: np.ndarray
    keep: np.ndarray


class _Nets(NamedTuple):
    """The nets kept (those with pins), in CSR form, and the connections they keep."""

    start: np.ndarray
    names: list
    keep: np.ndarray  # per net
    pin_keep: np.ndarray  # per connection
    pin_names: list


def assemble(r) -> Design:
    """The design of the parsed DEF ``r`` (a :class:`.def_reader._Def` after ``parse``):
    blocks, nets, rows, blockages, regions, checked."""
    if r.dbu is None:
        r.fail("no UNITS DISTANCE MICRONS statement", 0)
    dbu = float(r.dbu)  # type: ignore[arg-type]
    die, blockages, blockage_density = _die_and_blockages(r, dbu)
    rows, core = _rows(r, dbu, die)
    centre = ((core[0] + core[2]) / 2, (core[1] + core[3]) / 2)
    comp = _components(r, dbu, centre)
    comp_index = dict(zip(comp.names, range(len(comp.names))))
    term = _terminals(r, dbu, comp_index, centre)
    nt = r.nets or dict(names=[], net_of=np.zeros(0, np.int64), pc=[], pp=[],
                        weight=np.zeros(0), keep=np.zeros(0, bool), start=0, end=0)
    conn = _connections(r, nt, comp_index)
    dx, dy, lef_pins = _pin_offsets(r, nt, comp, conn)
    nets = _kept_nets(r, nt, conn, lef_pins)
    nt_ = len(term.names)
    names = comp.names + term.names
    kind = np.concatenate([comp.kind, np.full(nt_, TERMINAL, np.int8)])
    halo = np.zeros((len(names), 4))
    if comp.halo is not None:
        halo[:len(comp.names)] = comp.halo / dbu
    canon = {m: m for m in comp.master_names}  # one string per master, not per component
    block_type = list(map(canon.__getitem__, comp.models)) + [""] * nt_
    # the input's orientation of a fixed component or an I/O pin is a fact, not a choice
    allowed, orient = comp.allowed, comp.orient
    fixed = comp.status == FIXED
    allowed[fixed] |= (np.uint8(1) << orient[fixed].astype(np.uint8)).astype(np.uint8)
    t_allowed = (np.uint8(1) << np.array(term.orient, np.uint8)).astype(np.uint8)
    regions = r.cell_regions(names, kind, dbu)
    if r.skipped:
        _warn_skipped(r.path, r.skipped)
    keep = nets.pin_keep
    try:
        design = Design(
            r.name, die, names, kind,
            np.concatenate([comp.width, term.w]), np.concatenate([comp.height, term.h]),
            nets.start, conn.block[keep], dx[keep], dy[keep],
            halo=halo, orient_allowed=np.concatenate([allowed, t_allowed]),
            net_names=nets.names, net_weight=nt["weight"][nets.keep],
            pin_names=nets.pin_names,
            rows=rows, blockages=blockages,
            blockage_max_density=blockage_density, regions=regions, block_type=block_type,
            x=np.concatenate([comp.x, term.x]), y=np.concatenate([comp.y, term.y]),
            orient=np.concatenate([orient, np.array(term.orient, np.int8)]),
            status=np.concatenate([comp.status, np.array(term.status, np.int8)]),
            dbu=int(dbu))
    except DesignError as e:  # validation of the assembled design: name the file
        raise _located(r, e) from None
    design.source = r.path
    return design


def _die_and_blockages(r, dbu: float):
    """The die's bounding box, µm, and the placement blockages with their maximum densities:
    a rectilinear DIEAREA's notches first (full blockages), then the BLOCKAGES section's."""
    if r.die_pts is None:
        r.fail("no DIEAREA statement", 0)
    pts = np.array(r.die_pts, dtype=np.float64) / dbu
    die = np.array([pts[:, 0].min(), pts[:, 1].min(), pts[:, 0].max(), pts[:, 1].max()])
    blk = [np.array(r.blockages, dtype=np.float64).reshape(-1, 4) / dbu]
    dens = [np.array(r.blockage_density, dtype=np.float64)]
    if len(pts) > 2:
        try:
            blk.insert(0, _polygon_rects(pts, False))
        except ValueError as e:
            r.fail(f"DIEAREA: {e}", r.die_pos)
        dens.insert(0, np.zeros(len(blk[0])))
        r.notches = len(blk[0])
    return die, np.concatenate(blk), np.concatenate(dens)


def _rows(r, dbu: float, die: np.ndarray):
    """The rows (the ``rows`` argument of :class:`Design`, None without ROW statements) and
    the core: the box the rows span, else the die."""
    lib = r.lib
    rows = {"x": [], "y": [], "height": [], "site_width": [], "num_sites": [], "orient": []}
    for site, sp, x, y, o, nx, ny, sx, sy in r.rows:
        if lib is None or site not in lib.sites:
            r.fail(f"ROW: site {site!r} is not defined in the LEF library"
                   + ("" if lib is not None else " (no LEF given)"), sp)
        sw, sh = lib.sites[site]  # type: ignore[union-attr]
        step_x = sx / dbu if sx else sw
        step_y = sy / dbu if sy else sh
        rows["x"].append(np.full(ny, x / dbu))
        rows["y"].append(y / dbu + np.arange(ny) * step_y)
        rows["height"].append(np.full(ny, sh))
        rows["site_width"].append(np.full(ny, step_x if nx > 1 else sw))
        rows["num_sites"].append(np.full(ny, nx, np.int64))
        rows["orient"].append(np.full(ny, o, np.int8))
    if not r.rows:
        return None, die
    rows = {k: np.concatenate(v) for k, v in rows.items()}
    rows["site_name"] = r.rows[0][0]
    rx = np.array(rows["x"])
    xhi = rx + np.array(rows["site_width"]) * np.array(rows["num_sites"])
    ry = np.array(rows["y"])
    core = np.array([rx.min(), ry.min(), xhi.max(), (ry + np.array(rows["height"])).max()])
    return rows, core


def _components(r, dbu: float, centre) -> _Components:
    """The components with their masters' sizes and orientations; an unplaced one movable at
    the core's centre, a ``FW_STATUS PINNED`` one pinned."""
    c = r.comps or dict(names=[], models=[], status=np.zeros(0, np.int8), x=np.zeros(0),
                        y=np.zeros(0), orient=np.zeros(0, np.int8), halo=None, pinned=[],
                        start=0, end=0)
    lib = r.lib
    nc = len(c["names"])
    macros = lib.macros if lib is not None else {}
    mnames = list(dict.fromkeys(c["models"]))
    mindex = {m: k for k, m in enumerate(mnames)}
    unknown = [m for m in mnames if m not in macros]
    if unknown:
        i = c["models"].index(unknown[0])
        hint = "" if lib is not None else " (no LEF given: pass lef=[...])"
        r.fail(f"component {c['names'][i]!r}: unknown LEF macro {unknown[0]!r}{hint}",
               r._find(c["start"], c["end"], c["names"][i]))
    ms = [macros[m] for m in mnames]
    cm = np.fromiter(map(mindex.__getitem__, c["models"]), np.int64, nc) if nc else \
        np.zeros(0, np.int64)
    mk = np.array([m.kind for m in ms], np.int8)
    ma = np.array([m.allowed for m in ms], np.uint8)
    kind = mk[cm]
    width = np.array([m.width for m in ms])[cm]
    height = np.array([m.height for m in ms])[cm]
    if c["halo"] is not None:
        bad = np.flatnonzero((kind == CELL) & c["halo"].any(axis=1))
        if len(bad):
            i = int(bad[0])
            r.fail(f"component {c['names'][i]!r}: + HALO on a standard cell (LEF macro "
                   f"{c['models'][i]!r}, CLASS {macros[c['models'][i]].cls}); halos "
                   "belong to macros", r._find(c["start"], c["end"], c["names"][i]))
    status, orient = c["status"].copy(), c["orient"]
    x, y = c["x"], c["y"]
    unpl = status < 0
    if unpl.any():
        w, h = orient_size(width[unpl], height[unpl], orient[unpl])
        x[unpl] = (centre[0] - w / 2) * dbu
        y[unpl] = (centre[1] - h / 2) * dbu
        status[unpl] = MOVABLE
    if c["pinned"]:
        status[np.array(c["pinned"])] = PINNED
    return _Components(c["names"], c["models"], ms, mnames, cm, kind, width, height, ma[cm],
                       status, orient, x / dbu, y / dbu, c["halo"])


def _terminals(r, dbu: float, comp_index: dict, centre) -> _Terminals:
    """The I/O pins as terminals: footprint from the pin's shape turned by its orientation,
    lower-left corner from its placement (an unplaced pin movable at the core's centre)."""
    t = _Terminals([], [], [], [], [], [], [])
    for name, rect, place in r.pins or []:
        st, px, py, o = place if place is not None else (-1, 0.0, 0.0, 0)
        if rect is None:
            rect = (0.0, 0.0, 0.0, 0.0)
        x1, y1, x2, y2 = rect
        cx_, cy_ = np.array([x1, x2, x1, x2]), np.array([y1, y1, y2, y2])
        M = _MATS[o]
        tx, ty = M[0, 0] * cx_ + M[0, 1] * cy_, M[1, 0] * cx_ + M[1, 1] * cy_
        w, h = abs(x2 - x1) / dbu, abs(y2 - y1) / dbu
        if st < 0:
            ow, oh = orient_size(w, h, o)
            lx, ly, st = centre[0] - float(ow) / 2, centre[1] - float(oh) / 2, MOVABLE
        else:
            lx, ly = (px + tx.min()) / dbu, (py + ty.min()) / dbu
        t.names.append(_TERMINAL_PREFIX + name if name in comp_index else name)
        t.w.append(w)
        t.h.append(h)
        t.x.append(lx)
        t.y.append(ly)
        t.orient.append(o)
        t.status.append(st)
    return t


def _connections(r, nt: dict, comp_index: dict) -> _Connections:
    """The block of every net connection: a component, or for ``( PIN name )`` the I/O pin's
    terminal; ``( * pin )`` connections (global nets) are counted as skipped and not kept; an
    unknown component or pin on a kept connection fails with the net's line."""
    net_of, pc, pp = nt["net_of"], nt["pc"], nt["pp"]
    nc = len(comp_index)
    term_index = {p[0]: nc + k for k, p in enumerate(r.pins or [])}
    npins = len(pc)
    keep_pin = nt["keep"][net_of] if npins else np.zeros(0, bool)
    ci = np.fromiter(map(comp_index.get, pc, repeat(-1)), np.int64, npins)
    is_io = np.zeros(npins, bool)
    if "PIN" in comp_index:  # a component named PIN: look at every connection
        is_io[:] = np.fromiter(map("PIN".__eq__, pc), bool, npins)
    else:
        cand = np.flatnonzero(ci < 0)
        is_io[cand[np.array([pc[i] == "PIN" for i in cand.tolist()], bool)]] = True
    io = np.flatnonzero(is_io)
    if len(io):
        ci[io] = np.fromiter(map(term_index.get, [pp[i] for i in io.tolist()], repeat(-1)),
                             np.int64, len(io))
    # "( * pin )": a connection to that pin of every component (global nets): skipped
    cand = np.flatnonzero((ci < 0) & ~is_io)
    star = np.zeros(npins, bool)
    if len(cand):
        star[cand[np.array([pc[i] == "*" for i in cand.tolist()], bool)]] = True
        if star.any():
            r.skipped["NETS ( * pin )"] += int(star.sum())
            keep_pin = keep_pin & ~star
    bad = np.flatnonzero((ci < 0) & keep_pin)
    if len(bad):
        j = int(bad[0])
        k = int(net_of[j])
        what = (f"unknown I/O pin {pp[j]!r}" if is_io[j] else f"unknown component {pc[j]!r}")
        r.fail(f"net {nt['names'][k]!r}: {what}",
               r._find(nt["start"], nt["end"], nt["names"][k]))
    return _Connections(ci, is_io, keep_pin)


def _pin_offsets(r, nt: dict, comp: _Components, conn: _Connections):
    """Offsets from the block centre of every connection to a component, from its master's
    LEF pin (key (master, pin name) looked up in one sorted table); 0 for I/O pins.  A kept
    connection to a pin without a shape fails with the net's line.  Also returns the LEF pin
    names met (a dict, name to number)."""
    net_of, pc, pp = nt["net_of"], nt["pc"], nt["pp"]
    npins = len(pc)
    pname_id: dict[str, int] = {}
    keys, kdx, kdy = [], [], []
    for k, m in enumerate(comp.masters):
        for p, (dx, dy) in m.pins.items():
            pid = pname_id.setdefault(p, len(pname_id))
            keys.append((k, pid))
            kdx.append(dx)
            kdy.append(dy)
    P = max(len(pname_id), 1)
    tab = np.array([k * P + p for k, p in keys], np.int64)
    order = np.argsort(tab)
    tab, kdx_a, kdy_a = tab[order], np.array(kdx)[order], np.array(kdy)[order]
    ci = conn.block
    dx = np.zeros(npins)
    dy = np.zeros(npins)
    sel = np.flatnonzero((~conn.is_io) & (ci >= 0))
    if len(sel):
        pid = np.fromiter(map(pname_id.get, pp, repeat(-1)), np.int64, npins)[sel]
        key = comp.model[ci[sel]] * P + pid
        if len(tab):
            pos = np.minimum(np.searchsorted(tab, key), len(tab) - 1)
            ok = (pid >= 0) & (tab[pos] == key)
            ok[ok] = ~np.isnan(kdx_a[pos[ok]])
        else:
            pos = np.zeros(len(sel), np.int64)
            ok = np.zeros(len(sel), bool)
        bad = np.flatnonzero(~ok & conn.keep[sel])
        if len(bad):
            j = int(sel[bad[0]])
            k = int(net_of[j])
            mdl = comp.master_names[int(comp.model[ci[j]])]
            r.fail(f"net {nt['names'][k]!r}: component {pc[j]!r} (LEF macro {mdl!r}) "
                   f"has no pin {pp[j]!r} with a shape",
                   r._find(nt["start"], nt["end"], nt["names"][k]))
        dx[sel[ok]] = kdx_a[pos[ok]]
        dy[sel[ok]] = kdy_a[pos[ok]]
    return dx, dy, pname_id


def _kept_nets(r, nt: dict, conn: _Connections, lef_pins: dict) -> _Nets:
    """The nets with kept connections (MUSTJOIN and empty nets dropped, the latter counted as
    skipped) in CSR form, and the pin names of their connections (one string per LEF pin
    name in ``lef_pins``, not per connection)."""
    net_of, pp = nt["net_of"], nt["pp"]
    nnets = len(nt["names"])
    npins = len(pp)
    keep_pin = conn.keep
    net_keep = nt["keep"] & (np.bincount(net_of[keep_pin], minlength=nnets) > 0) \
        if nnets else np.zeros(0, bool)
    pin_keep = (net_keep[net_of] & keep_pin) if npins else np.zeros(0, bool)
    pcanon = {p: p for p in lef_pins}
    pin_names = list(map(pcanon.get, pp, pp))
    if not pin_keep.all():
        pin_names = [p for p, k in zip(pin_names, pin_keep) if k]
    counts = np.bincount(net_of[pin_keep], minlength=nnets)[net_keep] if npins else \
        np.zeros(int(net_keep.sum()), np.int64)
    net_start = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    net_names = [nm for nm, k in zip(nt["names"], net_keep) if k] if not net_keep.all() \
        else nt["names"]
    ndrop = int(nnets - net_keep.sum()) - int((~nt["keep"]).sum())
    if ndrop:
        r.skipped["NETS without pins"] += ndrop
    return _Nets(net_start, net_names, net_keep, pin_keep, pin_names)


def _located(r, e: DesignError) -> DesignError:
    """A validation error of the assembled design with the file and, for a row or a region,
    the line of its statement (a region's type named)."""
    line = None
    m = re.fullmatch(r"row (\d+)", e.where or "")
    if m and r.rows:  # a row problem: the line of its ROW statement
        first = np.cumsum([row[6] for row in r.rows])
        k = int(np.searchsorted(first, int(m.group(1)), side="right"))
        line = r.line_at(r.rows[min(k, len(r.rows) - 1)][1])
    msg = e.message
    m = re.fullmatch(r"region '(.*)'", e.where or "")
    reg = [g for g in r.regions if m and g[0] == m.group(1)]
    if reg:  # a region problem: the line of its REGIONS statement, its type named
        line = r.line_at(reg[0][3])
        msg = msg.replace(e.where, f"{REGION_TYPES[reg[0][2]]} {e.where}", 1)
    return DesignError(msg, file=r.path, line=line, problems=e.problems, where=e.where)
