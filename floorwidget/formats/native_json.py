"""The native format: versioned, human-editable JSON in micrometres.

Layout (version 1)::

    {
      "format": "floorwidget-design", "version": 1,
      "name": "...", "units": "um", "dbu": 1000,
      "die": [xlo, ylo, xhi, yhi],
      "rows": [{"x": .., "y": .., "height": .., "site_width": .., "num_sites": .., "orient": "N"}],
      "site": "core",
      "grid": {"pitch": [px, py], "origin": [x0, y0]},
      "blockages": [[xlo, ylo, xhi, yhi] or {"rect": [xlo, ylo, xhi, yhi],
                                               "max_density": d}, ...],
      "blocks": [{"name": .., "kind": "macro|cluster|cell|terminal", "width": .., "height": ..,
                  "halo": [l, b, r, t] or h, "orientations": ["N", "FN", ..], "type": "..",
                  "x": .., "y": .., "orient": "N", "status": "movable|pinned|fixed"}],
      "nets": [{"name": .., "weight": 1.0, "pins": [[block, dx, dy] or [block, dx, dy, pin]]}],
      "regions": [{"name": .., "type": "fence|guide", "rects": [[xlo, ylo, xhi, yhi], ..],
                   "members": [block, ..], "group": ..}]
    }

Pin offsets are from the block centre in the N orientation.  Optional fields take defaults
(``halo`` 0, ``orientations`` all for macros and N otherwise, ``weight`` 1, ``status`` movable,
``x``/``y`` 0, ``orient`` N).  A blockage written as a bare rectangle is a full one; a
partial one carries its ``max_density`` in (0, 1] (the share of its area cells may fill).
Floats are written with ``repr`` so a round trip is exact.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np

from ..design import (
    ALL_ORIENTS,
    KIND_NAMES,
    MACRO,
    MAX_SITES,
    ORIENT_CODE,
    ORIENTATIONS,
    REGION_TYPES,
    STATUS_NAMES,
    CellRegions,
    Design,
    DesignError,
    Floorplan,
)
from ._io import atomic_write, read_json_file

MAX_DBU = 10**6  # database units per µm (DEF files use 100 to 20,000)
FORMAT = "floorwidget-design"
VERSION = 1
_KIND = {k: i for i, k in enumerate(KIND_NAMES)}
_STATUS = {k: i for i, k in enumerate(STATUS_NAMES)}
_REGION_TYPE = {k: i for i, k in enumerate(REGION_TYPES)}


class _Reader:
    def __init__(self, path: Path):
        self.path = str(path)

    def fail(self, where: str, msg: str):
        raise DesignError(f"{where}: {msg}", file=self.path, where=where)

    def get(self, obj: dict, key: str, where: str, default=KeyError):
        if not isinstance(obj, dict):
            self.fail(where, f"expected an object, got {type(obj).__name__}")
        if key in obj:
            return obj[key]
        if default is KeyError:
            self.fail(f"{where}.{key}" if where else key, "missing")
        return default

    def num(self, v, where: str, positive: bool = False, nonneg: bool = False) -> float:
        if isinstance(v, bool) or not isinstance(v, (int, float)):
            self.fail(where, f"expected a number, got {json.dumps(v)[:40]}")
        v = float(v)
        if not math.isfinite(v):
            self.fail(where, "not a finite number")
        if positive and v <= 0:
            self.fail(where, f"must be positive, got {v:g}")
        if nonneg and v < 0:
            self.fail(where, f"must not be negative, got {v:g}")
        return v

    def nums(self, v, n: int, where: str) -> list[float]:
        if not isinstance(v, list) or len(v) != n:
            self.fail(where, f"expected a list of {n} numbers")
        return [self.num(x, f"{where}[{i}]") for i, x in enumerate(v)]

    def text(self, v, where: str) -> str:
        if not isinstance(v, str) or not v:
            self.fail(where, f"expected a non-empty string, got {json.dumps(v)[:40]}")
        return v

    def choice(self, v, table: dict, where: str) -> int:
        if not isinstance(v, str) or v not in table:  # a list or object is unhashable
            self.fail(where, f"expected one of {', '.join(table)}, got {json.dumps(v)[:40]}")
        return table[v]

    def items(self, obj, key, where, default=KeyError) -> list:
        v = self.get(obj, key, where, default)
        if not isinstance(v, list):
            self.fail(f"{where}.{key}" if where else key, "expected a list")
        return v


def parse_json(doc: dict, path) -> Design:
    """Build a :class:`Design` from an already decoded native document.

    The document is read in the order of its sections (header, rows, grid, blockages, blocks,
    nets, database units, regions); the first bad field fails with its JSON path.
    """
    r = _Reader(path)
    name, die = _header(r, doc)
    rows = _rows(r, doc)
    pitch, origin = _grid(r, doc)
    blockages, max_density = _blockages(r, doc)
    b = _blocks(r, doc)
    index = _block_index(r, b["names"])
    nets = _nets(r, doc, index)
    dbu = doc.get("dbu", 1000)
    if isinstance(dbu, bool) or not isinstance(dbu, int) or not 0 < dbu <= MAX_DBU:
        r.fail("dbu", f"expected a whole number in 1..{MAX_DBU}")
    regions = _regions(r, doc, index)
    return Design(
        name, die, b["names"], b["kind"], b["width"], b["height"], nets["starts"],
        nets["pin_block"], nets["pin_dx"], nets["pin_dy"],
        halo=b["halo"], orient_allowed=b["allowed"], net_names=nets["net_names"],
        net_weight=nets["weights"], pin_names=nets["pin_names"], rows=rows, grid_pitch=pitch,
        grid_origin=origin, blockages=np.array(blockages).reshape(-1, 4),
        blockage_max_density=np.array(max_density, dtype=np.float64),
        regions=regions, block_type=b["types"], x=b["x"], y=b["y"], orient=b["orient"],
        status=b["status"], dbu=dbu, source=str(path))


def _header(r: _Reader, doc) -> tuple[str, list[float]]:
    """The format, version and units checked; the design's name and die."""
    if not isinstance(doc, dict):
        r.fail("(top level)", "expected an object")
    fmt = r.get(doc, "format", "")
    if fmt != FORMAT:
        r.fail("format", f"expected {FORMAT!r}, got {json.dumps(fmt)[:40]}")
    version = r.get(doc, "version", "")
    if version != VERSION:
        r.fail("version", f"this floorwidget reads version {VERSION}, the file is {version!r}")
    units = doc.get("units", "um")
    if units != "um":
        r.fail("units", f"expected 'um', got {json.dumps(units)[:40]}")
    return r.text(r.get(doc, "name", ""), "name"), r.nums(r.get(doc, "die", ""), 4, "die")


def _rows(r: _Reader, doc: dict) -> dict:
    """The ``rows`` argument of :class:`Design`."""
    rows: dict = {"x": [], "y": [], "height": [], "site_width": [], "num_sites": [],
                  "orient": []}
    for i, row in enumerate(r.items(doc, "rows", "", [])):
        w = f"rows[{i}]"
        rows["x"].append(r.num(r.get(row, "x", w), f"{w}.x"))
        rows["y"].append(r.num(r.get(row, "y", w), f"{w}.y"))
        rows["height"].append(r.num(r.get(row, "height", w), f"{w}.height", positive=True))
        rows["site_width"].append(r.num(r.get(row, "site_width", w), f"{w}.site_width",
                                        positive=True))
        ns = r.get(row, "num_sites", w)
        if isinstance(ns, bool) or not isinstance(ns, int) or not 0 < ns <= MAX_SITES:
            r.fail(f"{w}.num_sites", f"expected a whole number in 1..{MAX_SITES}")
        rows["num_sites"].append(ns)
        rows["orient"].append(r.choice(row.get("orient", "N"), ORIENT_CODE, f"{w}.orient"))
    rows["site_name"] = doc.get("site", "core")
    return rows


def _grid(r: _Reader, doc: dict):
    """The placement grid's pitch and origin (None when not given)."""
    grid = r.get(doc, "grid", "", None)
    pitch = origin = None
    if grid is not None:
        pitch = r.nums(r.get(grid, "pitch", "grid"), 2, "grid.pitch")
        if min(pitch) <= 0:
            r.fail("grid.pitch", "must be positive")
        if "origin" in grid:
            origin = r.nums(grid["origin"], 2, "grid.origin")
    return pitch, origin


def _blockages(r: _Reader, doc: dict) -> tuple[list, list]:
    """Blockage rectangles and their maximum densities (a bare rectangle: 0, full)."""
    blockages, max_density = [], []
    for i, b in enumerate(r.items(doc, "blockages", "", [])):
        w = f"blockages[{i}]"
        if isinstance(b, dict):
            blockages.append(r.nums(r.get(b, "rect", w), 4, w + ".rect"))
            md = r.num(r.get(b, "max_density", w, 0.0), w + ".max_density", nonneg=True)
            if md > 1:
                r.fail(w + ".max_density", f"must lie in [0, 1], got {md:g}")
            max_density.append(md)
        else:
            blockages.append(r.nums(b, 4, w))
            max_density.append(0.0)
    return blockages, max_density


def _blocks(r: _Reader, doc: dict) -> dict:
    """The blocks' fields as arrays, by :class:`Design` argument name (``types`` None when no
    block names a type)."""
    blocks = r.items(doc, "blocks", "")
    n = len(blocks)
    names, kind, width, height = [], np.zeros(n, np.int8), np.zeros(n), np.zeros(n)
    halo, allowed = np.zeros((n, 4)), np.zeros(n, np.uint8)
    x, y, orient, status = np.zeros(n), np.zeros(n), np.zeros(n, np.int8), np.zeros(n, np.int8)
    types: list[str] = []
    any_type = False
    for i, b in enumerate(blocks):
        w = f"blocks[{i}]"
        names.append(r.text(r.get(b, "name", w), f"{w}.name"))
        kind[i] = r.choice(r.get(b, "kind", w), _KIND, f"{w}.kind")
        width[i] = r.num(r.get(b, "width", w), f"{w}.width", nonneg=True)
        height[i] = r.num(r.get(b, "height", w), f"{w}.height", nonneg=True)
        h = b.get("halo", 0)
        if isinstance(h, list):
            halo[i] = r.nums(h, 4, f"{w}.halo")
        else:
            halo[i] = r.num(h, f"{w}.halo")
        if (halo[i] < 0).any():
            r.fail(f"{w}.halo", "must not be negative")
        allowed[i] = _allowed(r, b.get("orientations"), kind[i], w)
        x[i] = r.num(b.get("x", 0.0), f"{w}.x")
        y[i] = r.num(b.get("y", 0.0), f"{w}.y")
        orient[i] = r.choice(b.get("orient", "N"), ORIENT_CODE, f"{w}.orient")
        status[i] = r.choice(b.get("status", "movable"), _STATUS, f"{w}.status")
        t = b.get("type")
        if t is not None:
            any_type = True
            types.append(r.text(t, f"{w}.type"))
        else:
            types.append("")
    return {"names": names, "kind": kind, "width": width, "height": height, "halo": halo,
            "allowed": allowed, "x": x, "y": y, "orient": orient, "status": status,
            "types": types if any_type else None}


def _allowed(r: _Reader, ors, kind: int, w: str) -> int:
    """The bit mask of a block's allowed orientations (default: all eight for a macro, N for
    the others)."""
    if ors is None:
        return ALL_ORIENTS if kind == MACRO else 1
    if not isinstance(ors, list) or not ors:
        r.fail(f"{w}.orientations", "expected a non-empty list of orientations")
    bits = 0
    for j, o in enumerate(ors):
        bits |= 1 << r.choice(o, ORIENT_CODE, f"{w}.orientations[{j}]")
    return bits


def _block_index(r: _Reader, names: list[str]) -> dict[str, int]:
    """Block number by name; a repeated name fails at its second use."""
    index = {nm: i for i, nm in enumerate(names)}
    if len(index) != len(names):
        seen: set[str] = set()
        for i, nm in enumerate(names):
            if nm in seen:
                r.fail(f"blocks[{i}].name", f"duplicate block name {nm!r}")
            seen.add(nm)
    return index


def _nets(r: _Reader, doc: dict, index: dict[str, int]) -> dict:
    """The nets in CSR form with their pins, by :class:`Design` argument name (``pin_names``
    None when no pin is named)."""
    nets = r.items(doc, "nets", "")
    net_names, weights, starts = [], np.ones(len(nets)), [0]
    pin_block, pin_dx, pin_dy, pin_names = [], [], [], []
    any_pin_name = False
    for k, net in enumerate(nets):
        w = f"nets[{k}]"
        net_names.append(r.text(r.get(net, "name", w), f"{w}.name"))
        weights[k] = r.num(net.get("weight", 1.0), f"{w}.weight", nonneg=True)
        for j, p in enumerate(r.items(net, "pins", w)):
            pw = f"{w}.pins[{j}]"
            if not isinstance(p, list) or len(p) not in (3, 4):
                r.fail(pw, "expected [block, dx, dy] or [block, dx, dy, pin]")
            b = index.get(p[0]) if isinstance(p[0], str) else None
            if b is None:
                r.fail(f"{pw}[0]", f"unknown block {json.dumps(p[0])[:40]}")
            pin_block.append(b)
            pin_dx.append(r.num(p[1], f"{pw}[1]"))
            pin_dy.append(r.num(p[2], f"{pw}[2]"))
            if len(p) == 4:
                any_pin_name = True
                pin_names.append(r.text(p[3], f"{pw}[3]"))
            else:
                pin_names.append("")
        starts.append(len(pin_block))
    return {"net_names": net_names, "weights": weights, "starts": starts,
            "pin_block": pin_block, "pin_dx": pin_dx, "pin_dy": pin_dy,
            "pin_names": pin_names if any_pin_name else None}


def _regions(r: _Reader, doc: dict, index: dict[str, int]) -> CellRegions | None:
    """The cell regions and their members (None without regions)."""
    regions, member = [], np.full(len(index), -1, np.int32)
    for k, g in enumerate(r.items(doc, "regions", "", [])):
        w = f"regions[{k}]"
        rects = r.items(g, "rects", w)
        if not rects:
            r.fail(f"{w}.rects", "expected at least one rectangle")
        regions.append({"name": r.text(r.get(g, "name", w), f"{w}.name"),
                        "type": REGION_TYPES[r.choice(g.get("type", "fence"), _REGION_TYPE,
                                                      f"{w}.type")],
                        "rects": [r.nums(b, 4, f"{w}.rects[{j}]") for j, b in enumerate(rects)],
                        "group": r.text(g["group"], f"{w}.group") if "group" in g else None})
        for j, nm in enumerate(r.items(g, "members", w, [])):
            b = index.get(nm) if isinstance(nm, str) else None
            if b is None:
                r.fail(f"{w}.members[{j}]", f"unknown block {json.dumps(nm)[:40]}")
            member[b] = k
    return CellRegions.build(len(index), regions, member) if regions else None


def read_json(path) -> Design:
    """Read a native ``.json`` design.  Errors name the file and the JSON path of the field."""
    path = Path(path)
    return parse_json(read_json_file(path), path)


def _clean(v: float):
    """Integers stay integers in the file (easier to read); other floats keep full precision."""
    f = float(v)
    return int(f) if f.is_integer() and abs(f) < 2**53 else f


def to_document(design: Design, fp: Floorplan) -> dict:
    """The native document for ``design`` placed as ``fp``."""
    d = design
    rows = [{"x": _clean(d.row_x[i]), "y": _clean(d.row_y[i]), "height": _clean(d.row_height[i]),
             "site_width": _clean(d.row_site_width[i]), "num_sites": int(d.row_num_sites[i]),
             "orient": ORIENTATIONS[int(d.row_orient[i])]} for i in range(len(d.row_x))]
    blocks = []
    for i, nm in enumerate(d.names):
        b = {"name": nm, "kind": KIND_NAMES[d.kind[i]], "width": _clean(d.width[i]),
             "height": _clean(d.height[i])}
        h = d.halo[i]
        if h.any():
            b["halo"] = _clean(h[0]) if (h == h[0]).all() else [_clean(v) for v in h]
        default_allowed = ALL_ORIENTS if d.kind[i] == MACRO else 1
        if d.orient_allowed[i] != default_allowed:
            bits = int(d.orient_allowed[i])
            b["orientations"] = [o for j, o in enumerate(ORIENTATIONS) if bits >> j & 1]
        if d.block_type is not None and d.block_type[i]:
            b["type"] = d.block_type[i]
        b["x"] = _clean(fp.x[i])
        b["y"] = _clean(fp.y[i])
        if fp.orient[i]:
            b["orient"] = ORIENTATIONS[int(fp.orient[i])]
        if fp.status[i]:
            b["status"] = STATUS_NAMES[int(fp.status[i])]
        blocks.append(b)
    nets = []
    names = d.names
    pb, px, py = d.pin_block.tolist(), d.pin_dx.tolist(), d.pin_dy.tolist()
    pn = d.pin_names
    starts = d.net_start.tolist()
    for k, nm in enumerate(d.net_names):
        s, e = starts[k], starts[k + 1]
        if pn is None:
            pins = [[names[pb[j]], _clean(px[j]), _clean(py[j])] for j in range(s, e)]
        else:
            pins = [[names[pb[j]], _clean(px[j]), _clean(py[j])] + ([pn[j]] if pn[j] else [])
                    for j in range(s, e)]
        net = {"name": nm, "pins": pins}
        if d.net_weight[k] != 1.0:
            net["weight"] = _clean(d.net_weight[k])
        nets.append(net)
    doc = {"format": FORMAT, "version": VERSION, "name": d.name, "units": "um", "dbu": d.dbu,
           "die": [_clean(v) for v in d.die], "site": d.site_name, "rows": rows,
           "grid": {"pitch": [_clean(v) for v in d.grid_pitch],
                    "origin": [_clean(v) for v in d.grid_origin]},
           "blockages": [[_clean(v) for v in b] if md <= 0 else
                         {"rect": [_clean(v) for v in b], "max_density": _clean(md)}
                         for b, md in zip(d.blockages, d.blockage_max_density)],
           "blocks": blocks, "nets": nets}
    if len(d.regions):
        doc["regions"] = [{**g, "rects": [[_clean(v) for v in b] for b in g["rects"]],
                           "members": [d.names[i] for i in d.regions.members(k)]}
                          for k, g in enumerate(d.regions.to_list())]
    return doc


def write_json(design: Design, fp: Floorplan, path) -> None:
    """Write the native document atomically (temporary file, then rename)."""
    doc = to_document(design, fp)
    with atomic_write(path) as f:
        _dump(doc, f)


def _dump(doc: dict, f) -> None:
    """One block or net per line: diffable and still easy to edit by hand."""
    f.write("{\n")
    keys = list(doc)
    for i, k in enumerate(keys):
        v = doc[k]
        f.write(f"  {json.dumps(k)}: ")
        if isinstance(v, list) and v and isinstance(v[0], (dict, list)):
            f.write("[\n")
            f.write(",\n".join("    " + json.dumps(item, ensure_ascii=False) for item in v))
            f.write("\n  ]")
        else:
            f.write(json.dumps(v, ensure_ascii=False))
        f.write(",\n" if i < len(keys) - 1 else "\n")
    f.write("}\n")
