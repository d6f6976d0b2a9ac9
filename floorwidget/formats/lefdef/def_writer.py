"""Writing DEF (:func:`write_def`, :func:`write_def_pair`)."""

from __future__ import annotations

import warnings
from pathlib import Path

import numpy as np

from ...design import (
    FIXED,
    MOVABLE,
    ORIENTATIONS,
    PINNED,
    Design,
    DesignError,
    Floorplan,
    orient_size,
)
from ...kernels.io_pins import EDGE_DIR, edge_layers, nearest_edge
from .._io import write_files
from ._common import (
    _MATS,
    _TERMINAL_PREFIX,
    PIN_LAYER,
    STATUS_PROPERTY,
    LefDefWarning,
    _check_names,
    _dbu_ints,
    lef_path_for,
)
from .def_statements import blockage_statement, group_statements, placement_ints, region_lines
from .lef_writer import _abstracts, _lef_text, _sites
from .specialnets import power_statements
from .writeback import writeback_text


def write_def(design: Design, fp: Floorplan, path: str | Path, *,
              lef: bool | str | Path | None = None) -> None:
    """Write ``fp`` as DEF 5.8, atomically, with integers in ``design.dbu`` units.

    A design that was not read from DEF and LEF (``design.lef_files`` unset: native JSON,
    Bookshelf) has no library to go with the DEF, so by default its LEF abstracts are written
    too, to ``y.lef`` beside ``y.def`` (:func:`lef_path_for`); ``lef=False`` never writes one,
    ``lef=True`` always does, and a path names the LEF.  Both texts are built and checked
    before either file is touched, and the pair is written all or nothing
    (:func:`floorwidget.formats._io.write_files`).  A ``path`` ending in ``.gz`` or ``.bz2``
    is written compressed (its LEF stays plain text).

    Components: every macro, cell and soft cluster (``+ FIXED`` when fixed or pinned, pinned
    ones with ``+ PROPERTY FW_STATUS PINNED``; ``+ PLACED`` otherwise; ``+ HALO`` when set);
    terminals as ``PINS``; nets with their component pins (LEF pin names: the design's own, or
    those :func:`write_lef` derives) and ``( PIN name )`` for terminals; placement blockages.

    Parameters
    ----------
    design : Design
    fp : Floorplan
        The placement to write (of ``design``).
    path : path
        Output ``.def``.
    lef : bool or path, optional
        Whether (or where) to write the LEF abstracts as well; see above.

    Examples
    --------
    >>> write_def(design, fp, "blk_placed.def")                # doctest: +SKIP
    """
    if fp.design is not design:
        raise DesignError("the floorplan belongs to another design", file=str(path))
    source = getattr(design, "def_source", None)
    if lef is None:
        lef = not design.lef_files and source is None
    lef_path = None if lef is False else (lef_path_for(path) if lef is True else Path(lef))
    lef_text = _lef_text(design, lef_path) if lef_path is not None else None
    text = _def_text(design, fp, path) if source is None else writeback_text(design, fp, path)
    items = [(path, lambda f: f.write(text))]
    if lef_path is not None:  # the pair is written all or nothing
        items.insert(0, (lef_path, lambda f: f.write(lef_text)))
    write_files(items)


def _def_text(design: Design, fp: Floorplan, path) -> str:
    d = design
    dbu = d.dbu
    ab = _abstracts(d)
    comp = np.flatnonzero(ab.block_master >= 0)
    term = np.flatnonzero(ab.block_master < 0)
    names = d.names
    tnames = [names[i][len(_TERMINAL_PREFIX):] if names[i].startswith(_TERMINAL_PREFIX)
              else names[i] for i in term]
    _check_names([d.name], "design name", path)
    _check_names((names[i] for i in comp), "block", path)
    _check_names(tnames, "terminal", path)
    _check_names(d.net_names, "net", path)
    _check_names(ab.names, "master", path)

    def I(v):  # noqa: E743 - short for the many integer conversions below
        return _dbu_ints(v, dbu)

    xs_a, ys_a, orient, status = placement_ints(d, fp, path)

    out = ["VERSION 5.8 ;", 'DIVIDERCHAR "/" ;', 'BUSBITCHARS "[]" ;', f"DESIGN {d.name} ;",
           f"UNITS DISTANCE MICRONS {dbu} ;", "", "PROPERTYDEFINITIONS",
           f"  COMPONENT {STATUS_PROPERTY} STRING ;", "END PROPERTYDEFINITIONS", ""]
    dd = I(d.die)
    out.append(f"DIEAREA ( {dd[0]} {dd[1]} ) ( {dd[2]} {dd[3]} ) ;")
    snames, _, site_of = _sites(d)
    rx, ry, rs = I(d.row_x), I(d.row_y), I(d.row_site_width)
    for r in range(len(d.row_x)):
        out.append(f"ROW ROW_{r} {snames[site_of[r]]} {rx[r]} {ry[r]} "
                   f"{ORIENTATIONS[int(d.row_orient[r])]} DO {int(d.row_num_sites[r])} BY 1 "
                   f"STEP {rs[r]} 0 ;")
    for t in getattr(d, "tracks", ()):
        out.append(f"TRACKS {t.axis} {int(I(t.start))} DO {t.count} STEP {int(I(t.step))} "
                   f"LAYER {t.layer} ;")
    out.append("")
    xs, ys = xs_a.tolist(), ys_a.tolist()
    halo_a = I(d.halo)
    has_halo = halo_a.any(axis=1).tolist()
    halo = halo_a.tolist()
    stl, orl, bml = status.tolist(), orient.tolist(), ab.block_master.tolist()
    reg = d.regions
    regions = region_lines(d, path)
    if regions:
        out += regions + [""]
    out.append(f"COMPONENTS {len(comp)} ;")
    st_word = {MOVABLE: "PLACED", PINNED: "FIXED", FIXED: "FIXED"}
    for i in comp.tolist():
        s = stl[i]
        line = (f"- {names[i]} {ab.names[bml[i]]} + {st_word[s]} "
                f"( {xs[i]} {ys[i]} ) {ORIENTATIONS[orl[i]]}")
        if has_halo[i]:
            h = halo[i]
            line += f" + HALO {h[0]} {h[1]} {h[2]} {h[3]}"
        if s == PINNED:
            line += f' + PROPERTY {STATUS_PROPERTY} "PINNED"'
        out.append(line + " ;")
    out.append("END COMPONENTS")
    out.append("")
    # terminals: the oriented footprint [0, ow] x [0, oh] from the placement point, written in
    # the pin's own (N) frame through the inverse transform, so the reader lands on it exactly
    first_net: dict[int, str] = {}
    pn = d.pin_net
    if len(term):
        tmask = ab.block_master[d.pin_block] < 0
        tj = np.flatnonzero(tmask)
        for j in tj[::-1].tolist():
            first_net[int(d.pin_block[j])] = d.net_names[int(pn[j])]
        if (np.abs(d.pin_dx[tj]) * dbu > 0.5).any() or (np.abs(d.pin_dy[tj]) * dbu > 0.5).any():
            warnings.warn(f"{path}: DEF I/O pins connect at the centre of their shape; pin "
                          f"offsets on terminals are not written", LefDefWarning, stacklevel=2)
    out.append(f"PINS {len(term)} ;")
    wd, hd = I(d.width), I(d.height)
    layer_of, dir_of = _io_words(d, fp, term)
    for k, i in enumerate(term.tolist()):
        o = orl[i]
        ow, oh = orient_size(wd[i], hd[i], o)
        cxs = np.array([0, ow, 0, ow])
        cys = np.array([0, 0, oh, oh])
        M = _MATS[o].T  # inverse of an orthogonal matrix
        nx, ny = M[0, 0] * cxs + M[0, 1] * cys, M[1, 0] * cxs + M[1, 1] * cys
        s = "PLACED" if stl[i] == MOVABLE else "FIXED"
        out.append(f"- {tnames[k]} + NET {first_net.get(i, tnames[k])} + DIRECTION {dir_of[k]} "
                   f"+ USE SIGNAL + LAYER {layer_of[k]} ( {nx.min()} {ny.min()} ) "
                   f"( {nx.max()} {ny.max()} ) + {s} ( {xs[i]} {ys[i]} ) {ORIENTATIONS[o]} ;")
    out.append("END PINS")
    out.append("")
    if len(d.blockages):
        bl = I(d.blockages)
        out.append(f"BLOCKAGES {len(bl)} ;")
        out.extend(map(blockage_statement, bl.tolist(), d.blockage_max_density.tolist()))
        out.append("END BLOCKAGES")
        out.append("")
    power = d.power_shapes(fp)
    if power is not None and len(power):
        stmts = power_statements(power, dbu)
        out += [f"SPECIALNETS {len(stmts)} ;", *stmts, "END SPECIALNETS", ""]
    out.append(f"NETS {d.num_nets} ;")
    term_name = {int(i): tnames[k] for k, i in enumerate(term.tolist())}
    pb = d.pin_block.tolist()
    refs = [f"( PIN {term_name[b]} )" if bml[b] < 0 else f"( {names[b]} {p} )"
            for b, p in zip(pb, ab.pin_name)]
    st = d.net_start.tolist()
    wt = d.net_weight
    for k, nm in enumerate(d.net_names):
        line = f"- {nm} " + " ".join(refs[st[k]:st[k + 1]])
        if wt[k] != 1.0:
            w = float(wt[k])
            line += f" + WEIGHT {int(w) if w.is_integer() else repr(w)}"
        out.append(line + " ;")
    out.append("END NETS")
    out.append("")
    if len(reg):
        out += [f"GROUPS {len(reg)} ;", *group_statements(d, path), "END GROUPS", ""]
    out.append("END DESIGN")
    return "\n".join(out) + "\n"


def _io_words(d: Design, fp: Floorplan, term: np.ndarray) -> tuple[list[str], list[str]]:
    """Layer and direction of each terminal ``term`` for DEF ``PINS``: its own where the
    input gave them (``io_layers``, ``io_directions``); else the routing layer that reaches
    its nearest die edge (:func:`~floorwidget.kernels.io_pins.edge_layers`; a library-less
    design: the generic one its LEF abstracts name) and INOUT."""
    own_l = getattr(d, "io_layers", None) or {}
    own_d = getattr(d, "io_directions", None) or {}
    cx, cy = fp.centres()
    edge = nearest_edge(d.die, cx[term], cy[term]).tolist()
    by_dir = edge_layers(d.routing_layers)
    layers, dirs = [], []
    for i, e in zip(term.tolist(), edge):  # I/O pins: thousands at most
        nm = d.names[i]
        layers.append(own_l.get(nm) or by_dir[0 if EDGE_DIR[e] == "H" else 1] or PIN_LAYER)
        dirs.append(own_d.get(nm, "INOUT"))
    return layers, dirs


def write_def_pair(design: Design, fp: Floorplan, def_path: str | Path,
                   lef_path: str | Path | None = None) -> tuple[Path, Path]:
    """Write ``def_path`` and its LEF abstracts (default ``y.lef`` beside ``y.def``).

    Both texts are built and checked first, then the LEF and the DEF are written together,
    all or nothing.  :func:`read_def` on ``def_path`` with no ``lef=`` finds the LEF by the same
    convention.

    Returns
    -------
    (def_path, lef_path)
    """
    lp = lef_path_for(def_path) if lef_path is None else Path(lef_path)
    write_def(design, fp, def_path, lef=lp)
    return Path(def_path), lp
