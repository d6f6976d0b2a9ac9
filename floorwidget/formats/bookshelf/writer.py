"""Writing a placement (:func:`write_pl`) and a whole Bookshelf set (:func:`write_aux`),
atomically; the rules are in the package docstring."""

from __future__ import annotations

import itertools
from pathlib import Path

import numpy as np

from ...design import (
    FIXED,
    MACRO,
    MOVABLE,
    ORIENTATIONS,
    TERMINAL,
    Design,
    DesignError,
    Floorplan,
)
from .._io import atomic_write, write_files
from .tokens import _check_names


def _r(values) -> list[str]:
    return list(map(repr, np.asarray(values, dtype=np.float64).tolist()))


def _ni(design: Design) -> np.ndarray:
    """Mask of the blocks written as ``terminal_NI`` / ``/FIXED_NI`` (see the module notes)."""
    ni = getattr(design, "terminal_ni", None)
    if ni is not None and len(ni) == design.num_blocks:
        return np.asarray(ni, bool)
    return design.kind == TERMINAL


CHUNK = 1 << 18  # lines formatted at a time: the text of a 10^7-cell design is never whole


def _pl_chunks(design: Design, fp: Floorplan):
    d = design
    yield "UCLA pl 1.0\n# written by floorwidget\n\n"
    fixed = fp.status != MOVABLE
    ni = _ni(d)
    orn = np.array(ORIENTATIONS, dtype=object)
    for a in range(0, d.num_blocks, CHUNK):
        b = min(a + CHUNK, d.num_blocks)
        flag = np.where(fixed[a:b], np.where(ni[a:b], " /FIXED_NI", " /FIXED"), "").tolist()
        yield "".join(f"{nm} {x} {y} : {o}{f}\n" for nm, x, y, o, f in
                      zip(d.names[a:b], _r(fp.x[a:b]), _r(fp.y[a:b]),
                          orn[fp.orient[a:b]].tolist(), flag))


def _pl_text(design: Design, fp: Floorplan) -> str:
    return "".join(_pl_chunks(design, fp))


def _nodes_chunks(d: Design, tflag: np.ndarray):
    for a in range(0, d.num_blocks, CHUNK):
        b = min(a + CHUNK, d.num_blocks)
        yield "".join(f"{nm} {w} {h}{t}\n" for nm, w, h, t in
                      zip(d.names[a:b], _r(d.width[a:b]), _r(d.height[a:b]),
                          tflag[a:b].tolist()))


def _nets_chunks(d: Design):
    """The ``.nets`` body, a few hundred thousand nets at a time."""
    deg = d.net_degree
    m = d.num_nets
    for a in range(0, m, CHUNK):
        b = min(a + CHUNK, m)
        p0, p1 = int(d.net_start[a]), int(d.net_start[b])
        names = [d.names[i] for i in d.pin_block[p0:p1].tolist()]
        pins = [f"  {nm} B : {x} {y}\n" for nm, x, y in
                zip(names, _r(d.pin_dx[p0:p1]), _r(d.pin_dy[p0:p1]))]
        out = np.empty((b - a) + (p1 - p0), dtype=object)
        head = d.net_start[a:b] - p0 + np.arange(b - a)
        is_head = np.zeros(len(out), bool)
        is_head[head] = True
        out[head] = [f"NetDegree : {k} {nm}\n" for k, nm in
                     zip(deg[a:b].tolist(), d.net_names[a:b])]
        out[~is_head] = pins
        yield "".join(out.tolist())


def _write_chunks(chunks):
    def write(f):
        for c in chunks():
            f.write(c)
    return write


def write_pl(design: Design, fp: Floorplan, path) -> None:
    """Write a Bookshelf ``.pl`` placement atomically.

    Positions are lower-left corners of the oriented footprint; pinned and fixed blocks get
    ``/FIXED`` (``/FIXED_NI`` for I/O terminals).
    """
    _check_names(design.names, "block", path)
    text = _pl_text(design, fp)
    with atomic_write(path) as f:
        f.write(text)


def write_aux(design: Design, fp: Floorplan | None, target) -> Path:
    """Write a full Bookshelf set (.aux .nodes .nets .wts .pl .scl) for ``design`` placed as ``fp``.

    Parameters
    ----------
    design : Design
    fp : Floorplan or None
        The placement for the ``.pl`` (default ``design.initial``).
    target : str or Path
        An existing directory (files are named after the design) or a path ending in ``.aux``
        (files are named after its stem, beside it).

    Returns
    -------
    Path
        The ``.aux`` written.  The set is written all or nothing (every file to a temporary
        first, then all renamed; see :func:`floorwidget.formats._io.write_files`), and nothing
        is written when a name cannot be expressed in Bookshelf.
    """
    d = design
    fp = d.initial if fp is None else fp
    target = Path(target)
    if target.suffix.lower() == ".aux":
        directory, stem = target.parent, target.stem
    else:
        directory, stem = target, d.name
    if not directory.is_dir():
        raise DesignError(f"cannot write: folder {directory} does not exist", file=str(target))
    _check_names([stem], "design", target)
    _check_names(d.names, "block", target)
    _check_names(d.net_names, "net", target)

    fixed_macro = (d.kind == MACRO) & (fp.status == FIXED)
    ni = _ni(d)
    tflag = np.where(ni, " terminal_NI",
                     np.where(fixed_macro | (d.kind == TERMINAL), " terminal", ""))
    nterm = int((tflag != "").sum())
    nodes_head = (f"UCLA nodes 1.0\n# written by floorwidget\n\nNumNodes : {d.num_blocks}\n"
                  f"NumTerminals : {nterm}\n")
    nets_head = (f"UCLA nets 1.0\n# written by floorwidget\n\nNumNets : {d.num_nets}\n"
                 f"NumPins : {d.num_pins}\n")

    heavy = np.flatnonzero(d.net_weight != 1.0)  # nets not listed weigh 1
    wts = "UCLA wts 1.0\n# written by floorwidget; nets not listed weigh 1\n\n" + "".join(
        f"{d.net_names[j]} {w}\n" for j, w in zip(heavy.tolist(), _r(d.net_weight[heavy])))

    scl = [f"UCLA scl 1.0\n# written by floorwidget\n\nNumRows : {len(d.row_x)}\n\n"]
    for i in range(len(d.row_x)):  # rows, not cells
        sw = repr(float(d.row_site_width[i]))
        scl.append(f"CoreRow Horizontal\n  Coordinate : {float(d.row_y[i])!r}\n"
                   f"  Height : {float(d.row_height[i])!r}\n  Sitewidth : {sw}\n"
                   f"  Sitespacing : {sw}\n  Siteorient : {ORIENTATIONS[int(d.row_orient[i])]}\n"
                   f"  Sitesymmetry : Y\n  SubrowOrigin : {float(d.row_x[i])!r} "
                   f"NumSites : {int(d.row_num_sites[i])}\nEnd\n")
    aux = (f"RowBasedPlacement : {stem}.nodes {stem}.nets {stem}.wts {stem}.pl "
           f"{stem}.scl\n")
    # the large files are formatted and written a chunk at a time
    chunks = {".nodes": lambda: itertools.chain([nodes_head], _nodes_chunks(d, tflag)),
              ".nets": lambda: itertools.chain([nets_head], _nets_chunks(d)),
              ".wts": lambda: [wts], ".pl": lambda: _pl_chunks(d, fp),
              ".scl": lambda: scl, ".aux": lambda: [aux]}
    write_files([(directory / f"{stem}{suffix}", _write_chunks(make))
                 for suffix, make in chunks.items()])  # all or nothing
    return directory / f"{stem}.aux"
