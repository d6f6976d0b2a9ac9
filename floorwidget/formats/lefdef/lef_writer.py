"""LEF abstracts for designs that come without a library (:func:`write_lef`)."""

from __future__ import annotations

import warnings
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ...design import (
    CELL,
    CLUSTER,
    KIND_NAMES,
    MACRO,
    TERMINAL,
    Design,
)
from .._io import atomic_write
from ._common import PIN_LAYER, LefDefWarning, _check_names, _mask_symmetry


@dataclass
class _Abstracts:
    names: list[str]            # master names
    kind: list[int]
    width: list[float]
    height: list[float]
    allowed: list[int]
    block_master: np.ndarray    # per block, -1 for terminals
    pin_name: list[str]         # per design pin ('' for terminal connections)
    master_pins: list[dict]     # per master: pin name -> (dx, dy)


def _abstracts(design: Design) -> _Abstracts:
    """Masters and pin names for writing: the design's own when it has them and they are
    consistent, else derived (one master per type and geometry, pins p0, p1, ... per distinct
    offset)."""
    d = design
    dbu = d.dbu
    n = d.num_blocks
    wd = np.round(d.width * dbu).astype(np.int64)
    hd = np.round(d.height * dbu).astype(np.int64)
    bt = d.block_type
    key_of: dict[tuple, int] = {}
    keys: list[tuple] = []
    bm_l = [-1] * n
    kl, wl, hl, al = d.kind.tolist(), wd.tolist(), hd.tolist(), d.orient_allowed.tolist()
    for i in range(n):  # per block, in plain Python values (writing is per line anyway)
        k = kl[i]
        typed = bt is not None and bt[i]
        if k == TERMINAL and not typed:
            continue  # an I/O pin (DEF PINS); typed terminals are pads (DEF COMPONENTS)
        t = bt[i] if typed else f"{KIND_NAMES[k]}_{wl[i]}x{hl[i]}"
        key = (t, k, wl[i], hl[i], al[i])
        j = key_of.get(key)
        if j is None:
            j = key_of[key] = len(keys)
            keys.append(key)
        bm_l[i] = j
    bm = np.array(bm_l, np.int64)
    per_type = Counter(k[0] for k in keys)
    names, used = [], set()
    for t, _k, w, h, _a in keys:
        nm = t if per_type[t] == 1 else f"{t}_{w}x{h}"
        base, s = nm, 1
        while nm in used:
            nm = f"{base}_{s}"
            s += 1
        used.add(nm)
        names.append(nm)
    m = len(keys)
    pb = d.pin_block
    pm = bm[pb]
    is_t = pm < 0
    pin_name = [""] * d.num_pins
    master_pins: list[dict] = [dict() for _ in range(m)]
    sel = np.flatnonzero(~is_t)
    ok = d.pin_names is not None
    if ok and len(sel):
        # the design's own pin names, if every (master, name) has one offset (to 1/2 dbu)
        pn_sel = np.array(d.pin_names, dtype=object)[sel].tolist()
        if "" in pn_sel:
            ok = False
        else:
            ids = {nm: k for k, nm in enumerate(dict.fromkeys(pn_sel))}
            nid = np.fromiter(map(ids.__getitem__, pn_sel), np.int64, len(pn_sel))
            key = pm[sel] * (int(nid.max()) + 1) + nid
            _, first, inv = np.unique(key, return_index=True, return_inverse=True)
            inv = inv.reshape(-1)
            dx, dy = d.pin_dx[sel], d.pin_dy[sel]
            if (np.abs(dx - dx[first][inv]) * dbu > 0.5).any() or \
                    (np.abs(dy - dy[first][inv]) * dbu > 0.5).any():
                ok = False
            else:
                for f in first.tolist():
                    master_pins[int(pm[sel[f]])][pn_sel[f]] = (float(dx[f]), float(dy[f]))
                pin_name = list(d.pin_names)
    if not ok:
        master_pins = [dict() for _ in range(m)]
        pin_name = [""] * d.num_pins
        sel = np.flatnonzero(~is_t)
        if len(sel):
            k2 = np.stack([pm[sel], np.round(d.pin_dx[sel] * 2 * dbu).astype(np.int64),
                           np.round(d.pin_dy[sel] * 2 * dbu).astype(np.int64)], 1)
            uniq, first, inv = np.unique(k2, axis=0, return_index=True, return_inverse=True)
            inv = inv.reshape(-1)
            starts = np.searchsorted(uniq[:, 0], uniq[:, 0], side="left")
            rank = np.arange(len(uniq)) - starts
            unames = [f"p{r}" for r in rank.tolist()]
            for u in range(len(uniq)):
                j = sel[first[u]]
                master_pins[int(uniq[u, 0])][unames[u]] = (d.pin_dx[j], d.pin_dy[j])
            for j, u in zip(sel.tolist(), inv.tolist()):
                pin_name[j] = unames[u]
    kinds = [k[1] for k in keys]
    return _Abstracts(names, kinds, [k[2] / dbu for k in keys], [k[3] / dbu for k in keys],
                      [k[4] for k in keys], bm, pin_name, master_pins)


def _um(v: float, dbu: int) -> str:
    """A µm value on the database grid, shortest exact text."""
    r = round(v * dbu) / dbu
    return repr(r + 0.0) if r != int(r) else str(int(r))


def _half_um(v: float, dbu: int) -> str:
    r = round(v * 2 * dbu) / (2 * dbu)
    return repr(r + 0.0) if r != int(r) else str(int(r))


def _sites(design: Design) -> tuple[list[str], list[tuple[float, float]], np.ndarray]:
    """Site names and sizes for the rows, and the site of each row."""
    d = design
    names, sizes, of_row = [], [], np.zeros(len(d.row_x), np.int64)
    seen: dict[tuple[float, float], int] = {}
    for r in range(len(d.row_x)):
        key = (float(d.row_site_width[r]), float(d.row_height[r]))
        if key not in seen:
            seen[key] = len(names)
            names.append(d.site_name if not names else f"{d.site_name}_{len(names)}")
            sizes.append(key)
        of_row[r] = seen[key]
    return names, sizes, of_row


def write_lef(design: Design, path: str | Path) -> None:
    """Write LEF abstracts for ``design`` (sites and one ``MACRO`` per master), atomically.

    Pins become 2x2 database-unit ``RECT``s centred at their offsets, on layer ``metal1``;
    ``SYMMETRY`` is the smallest one whose orientation group contains the allowed orientations
    (a warning when that adds orientations).

    Parameters
    ----------
    design : Design
    path : path
        Output ``.lef`` (conventionally :func:`lef_path_for` of the DEF).

    Examples
    --------
    >>> write_lef(design, "blk.lef"); write_def(design, fp, "blk.def", lef=False)  # doctest: +SKIP
    """
    text = _lef_text(design, path)
    with atomic_write(path) as f:
        f.write(text)


def _lef_text(design: Design, path) -> str:
    d = design
    dbu = d.dbu
    ab = _abstracts(d)
    _check_names(ab.names, "master", path)
    for mp in ab.master_pins:
        _check_names(mp, "pin", path)
    snames, ssizes, _ = _sites(d)
    out = ["VERSION 5.8 ;", 'BUSBITCHARS "[]" ;', 'DIVIDERCHAR "/" ;', "",
           "UNITS", f"  DATABASE MICRONS {dbu} ;", "END UNITS", "",
           f"LAYER {PIN_LAYER}", "  TYPE ROUTING ;", "  DIRECTION HORIZONTAL ;",
           "  PITCH 0.2 ;", "  WIDTH 0.1 ;", f"END {PIN_LAYER}", ""]
    for nm, (w, h) in zip(snames, ssizes):
        out += [f"SITE {nm}", "  CLASS CORE ;", f"  SIZE {_um(w, dbu)} BY {_um(h, dbu)} ;",
                f"END {nm}", ""]
    cls = {MACRO: "BLOCK", CLUSTER: "BLOCK SOFT", CELL: "CORE", TERMINAL: "PAD"}
    widened = []
    e = 1.0 / dbu
    for k, nm in enumerate(ab.names):
        w, h = ab.width[k], ab.height[k]
        sym, exact = _mask_symmetry(ab.allowed[k])
        if not exact:
            widened.append(nm)
        out += [f"MACRO {nm}", f"  CLASS {cls[ab.kind[k]]} ;", "  ORIGIN 0 0 ;",
                f"  SIZE {_um(w, dbu)} BY {_um(h, dbu)} ;"]
        if sym:
            out.append(f"  SYMMETRY {' '.join(sym)} ;")
        for p, (dx, dy) in ab.master_pins[k].items():
            cx, cy = w / 2 + dx, h / 2 + dy
            out += [f"  PIN {p}", "    DIRECTION INOUT ;", "    USE SIGNAL ;", "    PORT",
                    f"      LAYER {PIN_LAYER} ;",
                    f"        RECT {_half_um(cx - e, dbu)} {_half_um(cy - e, dbu)} "
                    f"{_half_um(cx + e, dbu)} {_half_um(cy + e, dbu)} ;",
                    "    END", f"  END {p}"]
        out += [f"END {nm}", ""]
    out.append("END LIBRARY")
    if widened:
        warnings.warn(f"{path}: LEF SYMMETRY cannot state exactly the allowed orientations of "
                      f"{len(widened)} master(s), e.g. {widened[0]!r}; wrote the smallest "
                      f"symmetry that contains them", LefDefWarning, stacklevel=3)
    return "\n".join(out) + "\n"
