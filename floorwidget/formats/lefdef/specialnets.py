"""The power grid in DEF ``SPECIALNETS``: written by both DEF writers, read by the DEF reader.

Written: one statement per net, ``- VDD ( * VDD ) + USE POWER`` and ``- VSS ( * VSS ) + USE
GROUND``, each shape a routed path segment ``+ ROUTED layer width + SHAPE RING|STRIPE|FOLLOWPIN
( x y ) ( x y )`` (``NEW`` before every further one), the two points on the centre line of the
rectangle at its two ends.  We take the special-wiring rule that a path ends at its end points
(no extension by half the width; from memory of the DEF reference): the reader applies the same
rule, so a written grid reads back exactly.

Read: every statement of a net with ``+ USE POWER`` or ``+ USE GROUND`` (or, without ``USE``,
a name starting ``VDD``/``VCC`` or ``VSS``/``GND``) gives its two-point path segments on each
``ROUTED``/``FIXED``/``COVER`` layer, with the ``SHAPE`` when given (``STRIPE`` otherwise;
``RING``, ``STRIPE`` and ``FOLLOWPIN`` are kept, ``COREWIRE``, ``BLOCKRING``, ``PADRING`` read
as rings, other shapes as stripes), into a :class:`~floorwidget.kernels.power.PowerShapes`.
Vias (and the zero-width segments that carry them) and ``RECT``/``POLYGON`` shapes are
not read (counted as skipped), nor a path's points after its first two.  Other special nets
are not modelled (they come back verbatim in a write-back).

A grid read from DEF is drawn and written back, but the placer does not honour it
(:meth:`~floorwidget.kernels.power.PowerShapes.low_stripes`): its stripes were cut around the
macros where the input had them, and the density it allows under them is not in the file.
"""

from __future__ import annotations

import re
from collections import Counter

import numpy as np

from ...design import DesignError
from ...kernels.power import NETS, RING, SHAPES, STRIPE, PowerShapes

__all__ = ["parse_specialnets", "power_statements", "shapes_from_parsed"]

_SHAPE_CODE = {"RING": RING, "STRIPE": STRIPE, "FOLLOWPIN": 2, "COREWIRE": RING,
               "BLOCKRING": RING, "PADRING": RING}


def power_statements(shapes: PowerShapes, dbu: int) -> list[str]:
    """The ``SPECIALNETS`` statements of ``shapes`` (one per net that has shapes), in
    database units ``dbu`` per µm."""
    r = np.rint(shapes.rects * dbu).astype(np.int64)
    w = np.rint(shapes.width * dbu).astype(np.int64)
    vert = (r[:, 3] - r[:, 1]) > (r[:, 2] - r[:, 0])
    cx, cy = (r[:, 0] + r[:, 2]) // 2, (r[:, 1] + r[:, 3]) // 2
    # end points on the centre line (a rectangle whose sides sum to an odd number of units
    # reads back half a unit off)
    p = np.where(vert[:, None], np.stack([cx, r[:, 1], cx, r[:, 3]], 1),
                 np.stack([r[:, 0], cy, r[:, 2], cy], 1))
    out = []
    for k, (name, use) in enumerate(zip(NETS, ("POWER", "GROUND"))):
        sel = np.flatnonzero(shapes.net == k)
        if not len(sel):
            continue
        segs = [f"{shapes.layers[shapes.layer[i]]} {w[i]} + SHAPE {SHAPES[shapes.shape[i]]} "
                f"( {p[i, 0]} {p[i, 1]} ) ( {p[i, 2]} {p[i, 3]} )" for i in sel.tolist()]
        out.append(f"- {name} ( * {name} ) + USE {use}\n  + ROUTED " + "\n    NEW ".join(segs)
                   + " ;")
    return out


def _net_of(name: str, use: str | None) -> int | None:
    if use == "POWER":
        return 0
    if use == "GROUND":
        return 1
    if use is None:
        up = name.upper()
        if up.startswith(("VDD", "VCC")):
            return 0
        if up.startswith(("VSS", "GND")):
            return 1
    return None


# one path segment: ``+ ROUTED``/``FIXED``/``COVER`` or ``NEW``, the layer, a width above zero
# (zero-width segments carry vias), options (SHAPE, STYLE, MASK), then two points (a point may
# repeat a coordinate as ``*`` and carry an extension).  Keywords in upper case, as DEF writes
# them: a pattern that starts with a literal is searched for fast (ariane136's 12 MB of
# special wiring, mostly vias, in about 0.2 s; one case-blind pattern took 2.7 s).
_POINT = r"\(\s*(\S+)\s+(\S+)(?:\s+[^\s()]+)?\s*\)"
_REST = (r"\s+([^\s+;()]+)\s+(0*[1-9]\d*(?:\.\d*)?|0*\.0*[1-9]\d*)"
         r"((?:\s*\+\s*(?:SHAPE|STYLE|MASK)\s+[^\s+;()]+)*)\s*" + _POINT + r"\s*" + _POINT)
_SEGMENTS = (re.compile(r"\+\s*(?:ROUTED|FIXED|COVER)" + _REST), re.compile(r"NEW" + _REST))
_SHAPE_OPT = re.compile(r"\+\s*SHAPE\s+([^\s+;()]+)")


def parse_specialnets(body: str, offset: int, dbu: float, skipped: Counter) -> dict:
    """Power and ground wiring of a ``SPECIALNETS`` section body (comments blanked).

    One regular expression finds the two-point path segments of each power or ground
    statement; a path's further points, vias and ``RECT``/``POLYGON`` shapes are not read
    (counted in ``skipped``).

    Returns
    -------
    dict
        ``rects`` (k, 4) µm, ``layer`` (names), ``net``, ``shape``, ``width`` (µm), and
        ``stmts``: ``(start, end)`` offsets (``offset`` added) of the power and ground
        statements, for writing back.
    """
    segs, nets, stmts = [], [], []
    pos = 0
    for stmt in body.split(";")[:-1]:
        start, pos = pos, pos + len(stmt) + 1
        m = re.match(r"\s*(-)\s+(\S+)", stmt)
        if m is None:
            continue
        use = re.search(r"\+\s*USE\s+(\w+)", stmt, re.I)
        net = _net_of(m.group(2), use.group(1).upper() if use else None)
        if net is None:
            continue
        stmts.append((offset + start + m.start(1), offset + pos))
        found = _SEGMENTS[0].findall(stmt) + _SEGMENTS[1].findall(stmt)
        segs += found
        nets += [net] * len(found)
        for kw in ("RECT", "POLYGON", "VIA"):
            n = len(re.findall(r"\+\s*" + kw + r"\b", stmt, re.I))
            if n:
                skipped[f"SPECIALNETS {kw}"] += n
    k = len(segs)
    rects = np.zeros((k, 4))
    width = np.zeros(k)
    shape = np.full(k, STRIPE, np.int8)
    if k:
        width = np.array([float(s[1]) for s in segs])
        pts = np.array([s[3:7] for s in segs], dtype=object)
        star = pts == "*"
        pts[:, 2] = np.where(star[:, 2], pts[:, 0], pts[:, 2])  # ``*``: as the point before
        pts[:, 3] = np.where(star[:, 3], pts[:, 1], pts[:, 3])
        try:
            x0, y0, x1, y1 = pts.astype(np.float64).T
        except ValueError:
            raise DesignError("SPECIALNETS: a point is not two numbers") from None
        half = width / 2
        vert = x0 == x1
        diag = ~vert & (y0 != y1)
        if diag.any():
            skipped["SPECIALNETS diagonal segments"] += int(diag.sum())
        rects = np.where(vert[:, None],
                         np.stack([x0 - half, np.minimum(y0, y1), x0 + half,
                                   np.maximum(y0, y1)], 1),
                         np.stack([np.minimum(x0, x1), y0 - half, np.maximum(x0, x1),
                                   y0 + half], 1)) / dbu
        opts = [s[2] for s in segs]
        shape = np.array([_SHAPE_CODE.get(m.group(1).upper(), STRIPE)
                          if (m := _SHAPE_OPT.search(o)) else STRIPE for o in opts], np.int8)
        keep = ~diag
        rects, width, shape = rects[keep], width[keep] / dbu, shape[keep]
        segs = [s for s, k_ in zip(segs, keep) if k_]
        nets = [n for n, k_ in zip(nets, keep) if k_]
    return {"rects": rects.reshape(-1, 4), "layer": [s[0] for s in segs],
            "net": np.array(nets, np.int8), "shape": shape, "width": width, "stmts": stmts}


def shapes_from_parsed(parsed: dict, routing_layers: list, low_layers: int = 4
                       ) -> PowerShapes | None:
    """A :class:`PowerShapes` from :func:`parse_specialnets`' result (None when it found no
    power wiring); layer order from the LEF's routing layers, unknown names after them; the
    lowest ``low_layers`` are low (a layer not in the LEF when the number its name ends
    with is at most ``low_layers``)."""
    if not len(parsed["rects"]):
        return None
    names = [n for n, *_ in routing_layers]
    low = [k < low_layers for k in range(len(names))]
    for lay in parsed["layer"]:
        if lay not in names:  # not in the LEF: low by the number its name ends with
            names.append(lay)
            m = re.search(r"(\d+)$", lay)
            low.append(m is not None and int(m.group(1)) <= low_layers)
    idx = {n: k for k, n in enumerate(names)}
    return PowerShapes(layers=tuple(names), low=low, rects=parsed["rects"],
                       layer=[idx[n] for n in parsed["layer"]], net=parsed["net"],
                       shape=parsed["shape"], width=parsed["width"])
