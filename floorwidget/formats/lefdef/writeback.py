"""Writing a design read from DEF back to DEF: its source with only what the tool changed.

The write-back contract (``design.md``): a DEF written for a design read from DEF is the input
DEF with only the positions, orientations and statuses of non-fixed components and of pins the
user moved, and what the user added (blockages, halos, regions), changed.  Everything else
comes back verbatim, byte for byte: header, ``PROPERTYDEFINITIONS``, ``DIEAREA``, ``ROW``
names, ``TRACKS``, ``GCELLGRID``, ``VIAS``, ``NONDEFAULTRULES``, ``SPECIALNETS``, ``NETS``
(single-pin and unconnected ones, ``+ USE``, properties), pin ``DIRECTION``/``USE``/``LAYER``
and ports, component options (``+ SOURCE``, ``+ PROPERTY``, ...), ``UNPLACED`` and ``COVER``
statuses, comments and statements no reader here understands.  LEF master names are never
touched, so they are never invented.

Each change is an edit ``(start, end, replacement)`` on the source text
(:class:`~.source.DefSource`), and the edits are spliced in one pass:

* ``COMPONENTS``: a component whose position, orientation or status differs
  from the source gets its placement option replaced in place (``+ PLACED ( x y ) N``; a
  user-pinned one ``+ FIXED`` with ``+ PROPERTY FW_STATUS "PINNED"``).  One fixed (or
  ``COVER``) in the input is never moved, whatever the floorplan says.  A changed halo
  replaces the ``+ HALO`` option (or adds one, or drops it when it became zero).
* ``PINS``: an I/O pin the user moved gets its first placement replaced; the point comes from
  its first ``LAYER`` shape, as the reader reads it.
* ``PROPERTYDEFINITIONS``: ``COMPONENT FW_STATUS STRING`` is added when a pinned component is
  written and the source does not define the property.
* ``BLOCKAGES``: when the design's placement blockages differ from those read, source
  statements whose rectangles all remain are kept verbatim, the others dropped, routing and
  other blockages kept, and new rectangles written as new ``- PLACEMENT`` statements.
* ``SPECIALNETS``: when the power grid differs from the one read (the user set or cleared a
  grid), the grid *replaces* the input's power and ground wiring: the source statements of
  nets with ``+ USE POWER``/``GROUND`` (or named ``VDD``/``VSS``/...) are dropped and ``VDD``
  and ``VSS`` statements of the grid written (:mod:`.specialnets`); other special nets stay
  verbatim and the header count follows.  Mixing the user's grid with the input's own power
  wiring would leave two grids on top of each other.
* ``REGIONS`` and ``GROUPS``: when the cell regions differ from those read, ``REGIONS`` is
  written from the design, and ``GROUPS`` keeps the source groups without a region and writes
  one group per region.

Speed: the splice is a join over the unchanged stretches; a placement edit is one regular
expression search inside its statement.  Writing ariane136 with every movable component moved
takes a fraction of the time of writing it from scratch (``benchmarks/bench_def_write.py``).
"""

from __future__ import annotations

import re
from collections import Counter

import numpy as np

from ...design import FIXED, MOVABLE, ORIENTATIONS, PINNED, Design, DesignError, Floorplan
from ._common import _MATS, STATUS_PROPERTY, _dbu_ints
from .def_statements import blockage_statement, group_statements, placement_ints, region_lines
from .source import DefSource
from .specialnets import power_statements
from .tokens import _split_tokens, blank_comments

_PLACEMENT = re.compile(
    r"\+\s*(?:(?:PLACED|FIXED|COVER)\s*\(\s*[^\s()]+\s+[^\s()]+\s*\)\s*[NSEWF]{1,2}|UNPLACED)"
    r"(?=[\s;])", re.I)
_STATUS_WORD = {MOVABLE: "PLACED", PINNED: "FIXED", FIXED: "FIXED"}
_PLACE_KEYS = {"PLACED", "FIXED", "COVER", "UNPLACED"}


def writeback_text(design: Design, fp: Floorplan, path) -> str:
    """The DEF text of ``fp`` for a design read from DEF: its source with the edits above.

    Raises
    ------
    DesignError
        Naming a block whose position cannot be written, or the source file when a section
        no longer splits into the statements it was read from.
    """
    src: DefSource = design.def_source
    x, y, orient, status = placement_ints(design, fp, path)
    # a block fixed by the input is never moved (placement_ints keeps it where it was read)
    moved = ((fp.x != src.x) | (fp.y != src.y) | (orient != src.orient)
             | (status != src.status)) & (src.status != FIXED)
    nc = src.n_comps
    halo_changed = np.zeros(nc, bool)
    if not np.array_equal(design.halo, src.halo):
        halo_changed = (_dbu_ints(design.halo[:nc], src.dbu)
                        != _dbu_ints(src.halo[:nc], src.dbu)).any(axis=1)
    edits: list[tuple[int, int, str]] = []
    comps = np.flatnonzero(moved[:nc] | halo_changed)
    if len(comps):
        edits += _component_edits(src, design, comps, (x, y, orient, status), moved,
                                  halo_changed)
        if (status[comps] == PINNED).any():
            edits += _status_property(src)
    pins = np.flatnonzero(moved[nc:])
    if len(pins):
        edits += _pin_edits(src, pins, (x, y, orient, status))
    edits += _blockage_edits(src, design)
    if design.power is not src.power:
        edits += _power_edits(src, design, fp)
    if design.regions is not src.regions and design.regions != src.regions:
        edits += _region_edits(src, design, path)
    return _splice(src.text, edits)


def _splice(text: str, edits: list[tuple[int, int, str]]) -> str:
    edits.sort(key=lambda e: e[0])
    out, pos = [], 0
    for s, e, r in edits:
        if s < pos:
            raise AssertionError("overlapping write-back edits")
        out.append(text[pos:s])
        out.append(r)
        pos = e
    out.append(text[pos:])
    return "".join(out)


def _statements(src: DefSource, section: str, count: int) -> tuple[str, int, np.ndarray,
                                                                   np.ndarray]:
    """Body text of ``section`` (comments blanked), its offset in the source, and the start
    and ``;`` of each of its ``count`` statements (offsets in the body)."""
    _, b, e, _ = src.spans[section]
    body = blank_comments(src.text[b:e])
    if body.isascii():
        semi = np.flatnonzero(np.frombuffer(body.encode("ascii"), np.uint8) == ord(";"))
    else:
        semi = np.array([m.start() for m in re.finditer(";", body)], np.int64)
    if len(semi) != count:
        raise DesignError(f"cannot write back {section}: the section does not split into the "
                          f"{count} statements it was read from", file=src.path)
    start = np.concatenate([[0], semi[:-1] + 1]).astype(np.int64)
    return body, b, start, semi


def _placement(word: str, x: int, y: int, o: int) -> str:
    return f"+ {word} ( {x} {y} ) {ORIENTATIONS[o]}"


def _component_edits(src: DefSource, design: Design, comps: np.ndarray, placed, moved,
                     halo_changed) -> list[tuple[int, int, str]]:
    x, y, orient, status = placed
    body, b, start, semi = _statements(src, "COMPONENTS", src.n_comps)
    halo = _dbu_ints(design.halo, src.dbu)
    edits = []
    for i, xi, yi, oi, si in zip(comps.tolist(), x[comps].tolist(), y[comps].tolist(),
                                 orient[comps].tolist(), status[comps].tolist()):
        st, en = int(start[i]), int(semi[i])
        pl = _placement(_STATUS_WORD[si], xi, yi, oi) if moved[i] else None
        if pl is not None and not halo_changed[i] and PINNED not in (si, src.status[i]):
            m = _PLACEMENT.search(body, st, en + 1)
            if m is None:  # "- name model ;" (unplaced): the placement goes before the ';'
                edits.append((b + en, b + en, pl + " "))
                continue
            if _PLACEMENT.search(body, m.end(), en + 1) is None:
                edits.append((b + m.start(), b + m.end(), pl))
                continue
        stmt = body[st:en]
        lead = len(stmt) - len(stmt.lstrip())
        new_halo = halo[i].tolist() if halo_changed[i] else None
        edits.append((b + st + lead, b + en + 1,
                      _rebuilt_component(stmt[lead:], pl, new_halo, si == PINNED)))
    return edits


def _rebuilt_component(stmt: str, placement: str | None, halo: list[int] | None,
                       pinned: bool) -> str:
    """``- name model + ... ;`` with its placement (when given) and halo (when given) replaced;
    every other option kept, token for token.  ``FW_STATUS`` follows the new status."""
    toks = _split_tokens(stmt)
    out: list[str] = []
    groups: list[list[str]] = []
    for t in toks:
        if t == "+":
            groups.append([t])
        elif groups:
            groups[-1].append(t)
        else:
            out.append(t)
    done = False
    for g in groups:
        key = g[1].upper() if len(g) > 1 else ""
        if key in _PLACE_KEYS and placement is not None:
            if not done:
                out.append(placement)
                done = True
        elif key == "HALO" and halo is not None:
            continue
        elif key == "PROPERTY" and placement is not None:  # FW_STATUS follows the new status
            keep = [p for k in range(2, len(g), 2) for p in g[k:k + 2]
                    if g[k] != STATUS_PROPERTY]
            if keep:
                out += g[:2] + keep
        else:
            out += g
    if placement is not None and not done:
        out.append(placement)
    if halo is not None and any(halo):
        out.append(f"+ HALO {halo[0]} {halo[1]} {halo[2]} {halo[3]}")
    if placement is not None and pinned:
        out.append(f'+ PROPERTY {STATUS_PROPERTY} "PINNED"')
    return " ".join(out) + " ;"


def _status_property(src: DefSource) -> list[tuple[int, int, str]]:
    """Define ``COMPONENT FW_STATUS STRING`` unless the source does."""
    line = f"COMPONENT {STATUS_PROPERTY} STRING ;"
    span = src.spans.get("PROPERTYDEFINITIONS")
    if span is None:
        return [(src.units_end, src.units_end,
                 f"\nPROPERTYDEFINITIONS\n  {line}\nEND PROPERTYDEFINITIONS")]
    body = blank_comments(src.text[span[1]:span[2]])
    if re.search(r"\bCOMPONENT\s+" + STATUS_PROPERTY + r"\b", body):
        return []
    return [(span[2], span[2], f"  {line}\n")]


def _pin_edits(src: DefSource, pins: np.ndarray, placed) -> list[tuple[int, int, str]]:
    x, y, orient, status = placed
    nc = src.n_comps
    body, b, start, semi = _statements(src, "PINS", len(src.x) - nc)
    edits = []
    for k in pins.tolist():  # I/O pins: thousands at most
        i = nc + k
        o = int(orient[i])
        x1, y1, x2, y2 = src.pin_rect[k]
        cx, cy = np.array([x1, x2, x1, x2]), np.array([y1, y1, y2, y2])
        M = _MATS[o]
        tx, ty = M[0, 0] * cx + M[0, 1] * cy, M[1, 0] * cx + M[1, 1] * cy
        # the reader's lower-left is the placement point plus the shape's oriented minimum
        pl = _placement("PLACED" if status[i] == MOVABLE else "FIXED",
                        int(round(x[i] - tx.min())), int(round(y[i] - ty.min())), o)
        st, en = int(start[k]), int(semi[k])
        m = _PLACEMENT.search(body, st, en + 1)
        if m is None:
            edits.append((b + en, b + en, pl + " "))
        else:
            edits.append((b + m.start(), b + m.end(), pl))
    return edits


def _section_edit(src: DefSource, section: str, lines: list[str],
                  anchor: int) -> list[tuple[int, int, str]]:
    """Replace ``section`` by ``lines`` (drop it when empty), or insert them at ``anchor``."""
    span = src.spans.get(section)
    text = "\n".join(lines)
    if span is not None:
        return [(span[0], span[3], text)]
    return [(anchor, anchor, "\n" + text + "\n")] if lines else []


def _blockage_edits(src: DefSource, design: Design) -> list[tuple[int, int, str]]:
    cur, dens = design.blockages, design.blockage_max_density
    if (cur is src.blockages or np.array_equal(cur, src.blockages)) and \
            np.array_equal(dens, src.blockage_max_density):
        return []
    dbu = src.dbu
    avail = Counter(zip(map(tuple, _dbu_ints(cur, dbu).tolist()), dens.tolist()))
    was = list(zip(map(tuple, _dbu_ints(src.blockages, dbu).tolist()),
                   src.blockage_max_density.tolist()))

    def take(rows) -> bool:
        need = Counter(rows)
        if any(avail[r] < c for r, c in need.items()):
            return False
        avail.subtract(need)
        return True

    take(was[:src.notches])  # the rectilinear DIEAREA's notches stay with the DIEAREA
    kept = []
    if "BLOCKAGES" in src.spans:
        body, _, start, semi = _statements(src, "BLOCKAGES", len(src.blockage_stmts))
        for k, info in enumerate(src.blockage_stmts):
            if info is None or take(was[info[0]:info[0] + info[1]]):
                kept.append("   " + body[start[k]:semi[k] + 1].strip())
    new = []
    for row in zip(map(tuple, _dbu_ints(cur, dbu).tolist()), dens.tolist()):
        if avail[row] > 0:
            avail[row] -= 1
            new.append("   " + blockage_statement(*row))
    stmts = kept + new
    lines = [f"BLOCKAGES {len(stmts)} ;", *stmts, "END BLOCKAGES"] if stmts else []
    anchor = next((src.spans[s][3] for s in ("PINS", "COMPONENTS") if s in src.spans),
                  src.design_end)
    return _section_edit(src, "BLOCKAGES", lines, anchor)


def _region_edits(src: DefSource, design: Design, path) -> list[tuple[int, int, str]]:
    comps = src.spans.get("COMPONENTS")
    edits = _section_edit(src, "REGIONS", region_lines(design, path),
                          comps[0] if comps else src.design_end)
    kept = []
    if "GROUPS" in src.spans:
        _, b, e, _ = src.spans["GROUPS"]
        body = blank_comments(src.text[b:e])
        for stmt in body.split(";")[:-1]:
            if not re.search(r"\+\s*REGION\b", stmt, re.I):
                kept.append("   " + stmt.strip() + " ;")
    stmts = kept + group_statements(design, path)
    lines = [f"GROUPS {len(stmts)} ;", *stmts, "END GROUPS"] if stmts else []
    return edits + _section_edit(src, "GROUPS", lines, src.design_end)


def _power_edits(src: DefSource, design: Design, fp: Floorplan) -> list[tuple[int, int, str]]:
    shapes = design.power_shapes(fp)
    new = power_statements(shapes, src.dbu) if shapes is not None else []
    span = src.spans.get("SPECIALNETS")
    if span is None:
        if not new:
            return []
        anchor = src.spans["NETS"][0] if "NETS" in src.spans else src.design_end
        text = "\n".join([f"SPECIALNETS {len(new)} ;", *new, "END SPECIALNETS", "", ""])
        return [(anchor, anchor, text)]
    head = src.text[span[0]:span[1]]
    m = re.match(r"(\s*SPECIALNETS\s+)(\d+)", head, re.I)
    if m is None:
        raise DesignError("cannot write back SPECIALNETS: no statement count in its header",
                          file=src.path)
    count = int(m.group(2)) - len(src.power_stmts) + len(new)
    edits = [(span[0] + m.start(2), span[0] + m.end(2), str(count))]
    edits += [(a, b, "") for a, b in src.power_stmts]
    if new:
        edits.append((span[1], span[1], "\n" + "\n".join(new)))
    return edits
