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
Vias, ``RECT``/``POLYGON`` shapes and multi-point paths beyond their segments are counted as
skipped.  Other special nets are not modelled (they come back verbatim in a write-back).
"""

from __future__ import annotations

import re
from collections import Counter

import numpy as np

from ...kernels.power import NETS, RING, SHAPES, STRIPE, PowerShapes

__all__ = ["parse_specialnets", "power_statements", "shapes_from_parsed"]

_SHAPE_CODE = {"RING": RING, "STRIPE": STRIPE, "FOLLOWPIN": 2, "COREWIRE": RING,
               "BLOCKRING": RING, "PADRING": RING}
_WIRE = {"ROUTED", "FIXED", "COVER", "SHIELD"}
_TOKEN = re.compile(r"\(|\)|;|[^\s();]+")


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


def parse_specialnets(body: str, offset: int, dbu: float, skipped: Counter) -> dict:
    """Power and ground wiring of a ``SPECIALNETS`` section body (comments blanked).

    Returns
    -------
    dict
        ``rects`` (k, 4) µm, ``layer`` (names), ``net``, ``shape``, ``width`` (µm), and
        ``stmts``: ``(start, end)`` offsets (``offset`` added) of the power and ground
        statements, for writing back.
    """
    rects, layers, nets, shapes, widths, stmts = [], [], [], [], [], []
    pos = 0
    for stmt in body.split(";")[:-1]:
        start, pos = pos, pos + len(stmt) + 1
        toks = _TOKEN.findall(stmt)
        if len(toks) < 2 or toks[0] != "-":
            continue
        up = [t.upper() for t in toks]
        use = next((up[k + 1] for k in range(1, len(up) - 1)
                    if up[k] == "USE" and toks[k - 1] == "+"), None)
        net = _net_of(toks[1], use)
        if net is None:
            continue
        lead = len(stmt) - len(stmt.lstrip())
        stmts.append((offset + start + lead, offset + pos))
        _wiring(toks, net, dbu, skipped, (rects, layers, nets, shapes, widths))
    return {"rects": np.array(rects, np.float64).reshape(-1, 4), "layer": layers,
            "net": np.array(nets, np.int8), "shape": np.array(shapes, np.int8),
            "width": np.array(widths, np.float64), "stmts": stmts}


def _wiring(toks: list[str], net: int, dbu: float, skipped: Counter, out) -> None:
    rects, layers, nets, shapes, widths = out
    k, n = 0, len(toks)
    while k < n:
        t = toks[k].upper()
        if (t in _WIRE and k > 0 and toks[k - 1] == "+") or t == "NEW":
            if t == "SHIELD":  # + SHIELD net layer ...
                k += 1
            k += 1
            if k + 1 >= n:
                break
            layer = toks[k]
            try:
                width = float(toks[k + 1]) / dbu
            except ValueError:
                skipped["SPECIALNETS wiring"] += 1
                k += 1
                continue
            k += 2
            shape = STRIPE
            pts: list[tuple[float, float]] = []
            while k < n and toks[k].upper() not in ("NEW",) and not (
                    toks[k] == "+" and k + 1 < n and toks[k + 1].upper() in _WIRE | {"USE"}):
                if toks[k] == "+" and k + 1 < n and toks[k + 1].upper() == "SHAPE":
                    shape = _SHAPE_CODE.get(toks[k + 2].upper(), STRIPE) if k + 2 < n else STRIPE
                    k += 3
                    continue
                if toks[k] == "(":
                    j = toks.index(")", k)
                    vals = toks[k + 1:j]
                    px = pts[-1][0] if pts and vals and vals[0] == "*" else None
                    py = pts[-1][1] if pts and len(vals) > 1 and vals[1] == "*" else None
                    try:
                        x = px if px is not None else float(vals[0])
                        y = py if py is not None else float(vals[1])
                        pts.append((x, y))
                    except (ValueError, IndexError):
                        skipped["SPECIALNETS points"] += 1
                    k = j + 1
                    continue
                if toks[k] != "+" and pts:  # a via name after the points
                    skipped["SPECIALNETS vias"] += 1
                k += 1
            for (x0, y0), (x1, y1) in zip(pts, pts[1:]):
                half = width * dbu / 2
                if x0 == x1:
                    r = (x0 - half, min(y0, y1), x0 + half, max(y0, y1))
                elif y0 == y1:
                    r = (min(x0, x1), y0 - half, max(x0, x1), y0 + half)
                else:
                    skipped["SPECIALNETS diagonal segments"] += 1
                    continue
                rects.append(tuple(v / dbu for v in r))
                layers.append(layer)
                nets.append(net)
                shapes.append(shape)
                widths.append(width)
            continue
        if t in ("RECT", "POLYGON", "VIA") and k > 0 and toks[k - 1] == "+":
            skipped[f"SPECIALNETS {t}"] += 1
        k += 1


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
