"""The :class:`~floorwidget.design.Design` a parsed DEF makes (:func:`assemble`, a part of the
DEF reader, :mod:`.def_reader`)."""

from __future__ import annotations

import re
from itertools import repeat

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


def assemble(r) -> Design:
    """The design of the parsed DEF ``r`` (a :class:`.def_reader._Def` after ``parse``):
    blocks, nets, rows, blockages, regions, checked."""
    if r.dbu is None:
        r.fail("no UNITS DISTANCE MICRONS statement", 0)
    dbu = float(r.dbu)  # type: ignore[arg-type]
    lib = r.lib
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
    blockages = np.concatenate(blk)
    blockage_density = np.concatenate(dens)

    # rows
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
    if r.rows:
        rows = {k: np.concatenate(v) for k, v in rows.items()}
        rows["site_name"] = r.rows[0][0]
        rx = np.array(rows["x"])
        xhi = rx + np.array(rows["site_width"]) * np.array(rows["num_sites"])
        ry = np.array(rows["y"])
        core = np.array([rx.min(), ry.min(), xhi.max(), (ry + np.array(rows["height"])).max()])
    else:
        core = die
    ccx, ccy = (core[0] + core[2]) / 2, (core[1] + core[3]) / 2

    # components
    c = r.comps or dict(names=[], models=[], status=np.zeros(0, np.int8), x=np.zeros(0),
                           y=np.zeros(0), orient=np.zeros(0, np.int8), halo=None, pinned=[],
                           start=0, end=0)
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
    mw = np.array([m.width for m in ms])
    mh = np.array([m.height for m in ms])
    ma = np.array([m.allowed for m in ms], np.uint8)
    canon = {m: m for m in mnames}
    kind, width, height = mk[cm], mw[cm], mh[cm]
    if c["halo"] is not None:
        bad = np.flatnonzero((kind == CELL) & c["halo"].any(axis=1))
        if len(bad):
            i = int(bad[0])
            r.fail(f"component {c['names'][i]!r}: + HALO on a standard cell (LEF macro "
                      f"{c['models'][i]!r}, CLASS {macros[c['models'][i]].cls}); halos "
                      "belong to macros", r._find(c["start"], c["end"], c["names"][i]))
    allowed = ma[cm]
    status, orient = c["status"].copy(), c["orient"]
    x, y = c["x"], c["y"]
    unpl = status < 0
    if unpl.any():
        w, h = orient_size(width[unpl], height[unpl], orient[unpl])
        x[unpl] = (ccx - w / 2) * dbu
        y[unpl] = (ccy - h / 2) * dbu
        status[unpl] = MOVABLE
    if c["pinned"]:
        status[np.array(c["pinned"])] = PINNED
    x = x / dbu
    y = y / dbu

    # I/O pins -> terminals
    pins = r.pins or []
    comp_index = dict(zip(c["names"], range(nc)))
    t_names, t_w, t_h, t_x, t_y, t_o, t_s = [], [], [], [], [], [], []
    for name, rect, place in pins:
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
            lx, ly, st = ccx - float(ow) / 2, ccy - float(oh) / 2, MOVABLE
        else:
            lx, ly = (px + tx.min()) / dbu, (py + ty.min()) / dbu
        t_names.append(_TERMINAL_PREFIX + name if name in comp_index else name)
        t_w.append(w)
        t_h.append(h)
        t_x.append(lx)
        t_y.append(ly)
        t_o.append(o)
        t_s.append(st)
    term_index = {p[0]: nc + k for k, p in enumerate(pins)}

    # nets
    nt = r.nets or dict(names=[], net_of=np.zeros(0, np.int64), pc=[], pp=[],
                           weight=np.zeros(0), keep=np.zeros(0, bool), start=0, end=0)
    net_of, pc, pp = nt["net_of"], nt["pc"], nt["pp"]
    deg = np.zeros(len(nt["names"]))  # only its length (the number of nets) is used
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
    # pin offsets from the LEF: key (master, pin name) looked up in a sorted table
    pname_id: dict[str, int] = {}
    keys, kdx, kdy = [], [], []
    for k, m in enumerate(ms):
        for p, (dx, dy) in m.pins.items():
            pid = pname_id.setdefault(p, len(pname_id))
            keys.append((k, pid))
            kdx.append(dx)
            kdy.append(dy)
    P = max(len(pname_id), 1)
    tab = np.array([k * P + p for k, p in keys], np.int64)
    order = np.argsort(tab)
    tab, kdx_a, kdy_a = tab[order], np.array(kdx)[order], np.array(kdy)[order]
    comp_pin = (~is_io) & (ci >= 0)
    dx = np.zeros(npins)
    dy = np.zeros(npins)
    sel = np.flatnonzero(comp_pin)
    if len(sel):
        pid = np.fromiter(map(pname_id.get, pp, repeat(-1)), np.int64, npins)[sel]
        key = cm[ci[sel]] * P + pid
        if len(tab):
            pos = np.minimum(np.searchsorted(tab, key), len(tab) - 1)
            ok = (pid >= 0) & (tab[pos] == key)
            ok[ok] = ~np.isnan(kdx_a[pos[ok]])
        else:
            pos = np.zeros(len(sel), np.int64)
            ok = np.zeros(len(sel), bool)
        bad = np.flatnonzero(~ok & keep_pin[sel])
        if len(bad):
            j = int(sel[bad[0]])
            k = int(net_of[j])
            mdl = mnames[int(cm[ci[j]])]
            r.fail(f"net {nt['names'][k]!r}: component {pc[j]!r} (LEF macro {mdl!r}) "
                      f"has no pin {pp[j]!r} with a shape",
                      r._find(nt["start"], nt["end"], nt["names"][k]))
        dx[sel[ok]] = kdx_a[pos[ok]]
        dy[sel[ok]] = kdy_a[pos[ok]]
    # keep nets with pins (drop MUSTJOIN and empty ones)
    net_keep = nt["keep"] & (np.bincount(net_of[keep_pin], minlength=len(deg)) > 0) \
        if len(deg) else np.zeros(0, bool)
    pin_keep = (net_keep[net_of] & keep_pin) if npins else np.zeros(0, bool)
    pcanon = {p: p for p in pname_id}
    pin_names = list(map(pcanon.get, pp, pp))
    if not pin_keep.all():
        pin_names = [p for p, k in zip(pin_names, pin_keep) if k]
    counts = np.bincount(net_of[pin_keep], minlength=len(deg))[net_keep] if npins else \
        np.zeros(int(net_keep.sum()), np.int64)
    net_start = np.concatenate([[0], np.cumsum(counts)]).astype(np.int64)
    net_names = [nm for nm, k in zip(nt["names"], net_keep) if k] if not net_keep.all() \
        else nt["names"]
    ndrop = int(len(deg) - net_keep.sum()) - int((~nt["keep"]).sum())
    if ndrop:
        r.skipped["NETS without pins"] += ndrop

    # assemble
    names = c["names"] + t_names
    nt_ = len(t_names)
    halo = np.zeros((nc + nt_, 4))
    if c["halo"] is not None:
        halo[:nc] = c["halo"] / dbu
    block_type = list(map(canon.__getitem__, c["models"])) + [""] * nt_
    # the input's orientation of a fixed component or an I/O pin is a fact, not a choice
    fixed = status == FIXED
    allowed[fixed] |= (np.uint8(1) << orient[fixed].astype(np.uint8)).astype(np.uint8)
    t_allowed = (np.uint8(1) << np.array(t_o, np.uint8)).astype(np.uint8)
    regions = r.cell_regions(names, np.concatenate([kind, np.full(nt_, TERMINAL,
                                                                        np.int8)]), dbu)
    if r.skipped:
        _warn_skipped(r.path, r.skipped)
    try:
        design = Design(
            r.name, die, names,
            np.concatenate([kind, np.full(nt_, TERMINAL, np.int8)]),
            np.concatenate([width, t_w]), np.concatenate([height, t_h]),
            net_start, ci[pin_keep], dx[pin_keep], dy[pin_keep],
            halo=halo, orient_allowed=np.concatenate([allowed, t_allowed]),
            net_names=net_names, net_weight=nt["weight"][net_keep], pin_names=pin_names,
            rows=rows if r.rows else None, blockages=blockages,
            blockage_max_density=blockage_density, regions=regions, block_type=block_type,
            x=np.concatenate([x, t_x]), y=np.concatenate([y, t_y]),
            orient=np.concatenate([orient, np.array(t_o, np.int8)]),
            status=np.concatenate([status, np.array(t_s, np.int8)]),
            dbu=int(dbu))
    except DesignError as e:  # validation of the assembled design: name the file
        line = None
        m = re.fullmatch(r"row (\d+)", e.where or "")
        if m and r.rows:  # a row problem: the line of its ROW statement
            first = np.cumsum([r[6] for r in r.rows])
            k = int(np.searchsorted(first, int(m.group(1)), side="right"))
            line = r.line_at(r.rows[min(k, len(r.rows) - 1)][1])
        msg = e.message
        m = re.fullmatch(r"region '(.*)'", e.where or "")
        reg = [r for r in r.regions if m and r[0] == m.group(1)]
        if reg:  # a region problem: the line of its REGIONS statement, its type named
            line = r.line_at(reg[0][3])
            msg = msg.replace(e.where, f"{REGION_TYPES[reg[0][2]]} {e.where}", 1)
        raise DesignError(msg, file=r.path, line=line, problems=e.problems,
                          where=e.where) from None
    design.source = r.path
    return design
