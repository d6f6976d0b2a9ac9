"""DEF placement constraints: ``BLOCKAGES``, ``REGIONS`` and ``GROUPS`` sections (a part of
the DEF reader, :mod:`.def_reader`)."""

from __future__ import annotations

import re
from decimal import Decimal

import numpy as np

from ...design import (
    CELL,
    CLUSTER,
    FENCE,
    GUIDE,
    REGION_TYPES,
    CellRegions,
)
from ._common import (
    _fraction,
)
from .polygons import _polygon_rects


class _ConstraintSections:
    """The constraint sections of :class:`~.def_reader._Def` (a mixin: it uses the reader's
    tokens, errors and parsed parts)."""

    def blockage_section(self, start: int, end: int, count: int, hpos: int) -> None:
        for word, toks, pos in self._statements("BLOCKAGES", start, end, count, hpos):
            kind = word.upper()
            if kind != "PLACEMENT":
                self.skipped[f"BLOCKAGES {kind}"] += 1
                self.blockage_stmts.append(None)
                continue
            k = 0
            density = 0.0
            first = len(self.blockages)
            while k < len(toks):
                w = toks[k].upper()
                if w == "PARTIAL" and k >= 1 and toks[k - 1] == "+":
                    if k + 1 >= len(toks):
                        self.fail("BLOCKAGES: PARTIAL needs a maximum density", pos)
                    pct = self.number(toks[k + 1], pos, "BLOCKAGES PARTIAL")
                    if not 0.0 <= pct <= 100.0:
                        self.fail(f"BLOCKAGES: PARTIAL density {toks[k + 1]} is not a "
                                  "percentage in [0, 100]", pos)
                    density = _fraction(toks[k + 1])
                    if density == 0.0 and Decimal(toks[k + 1]) > 0:  # would read as full
                        self.fail(f"BLOCKAGES: PARTIAL density {toks[k + 1]} is too small to "
                                  "hold (it would read as a full blockage)", pos)
                    k += 2
                elif w in ("RECT", "POLYGON"):
                    j = k + 1
                    pts = []
                    while j < len(toks) and toks[j] == "(":
                        if j + 3 >= len(toks) or toks[j + 3] != ")":
                            self.fail("BLOCKAGES: a point is written ( x y )", pos)
                        pts.append((self.number(toks[j + 1], pos, "BLOCKAGES"),
                                    self.number(toks[j + 2], pos, "BLOCKAGES")))
                        j += 4
                    if w == "RECT":
                        if len(pts) != 2:
                            self.fail("BLOCKAGES: RECT needs two points", pos)
                        (a, b), (c, d) = pts
                        self.blockages.append((min(a, c), min(b, d), max(a, c), max(b, d)))
                    else:
                        if len(pts) < 4:
                            self.fail("BLOCKAGES: POLYGON needs four points or more", pos)
                        try:
                            rects = _polygon_rects(np.array(pts), True)
                        except ValueError as e:
                            self.fail(f"BLOCKAGES: POLYGON {e}", pos)
                        if not len(rects):
                            self.fail("BLOCKAGES: POLYGON has no area", pos)
                        self.blockages.extend(map(tuple, rects))
                    k = j
                else:
                    k += 1
            if len(self.blockages) == first:
                self.fail("BLOCKAGES: a placement blockage needs a RECT or a POLYGON", pos)
            self.blockage_density.extend([density] * (len(self.blockages) - first))
            self.blockage_stmts.append((first, len(self.blockages) - first))

    # --- REGIONS and GROUPS -------------------------------------------------------------------
    def region_section(self, start: int, end: int, count: int, hpos: int) -> None:
        """``- name ( x y ) ( x y ) ... [+ TYPE FENCE | GUIDE] ;``: corner pairs."""
        for name, toks, pos in self._statements("REGIONS", start, end, count, hpos):
            pts, kind, k = [], None, 0
            while k < len(toks):
                if toks[k] == "(":
                    if k + 3 >= len(toks) or toks[k + 3] != ")":
                        self.fail("REGIONS: a point is written ( x y )", pos)
                    pts.append((self.number(toks[k + 1], pos, "REGIONS"),
                                self.number(toks[k + 2], pos, "REGIONS")))
                    k += 4
                elif toks[k] == "+" and k + 2 < len(toks) and toks[k + 1].upper() == "TYPE":
                    kind = toks[k + 2].upper()
                    if kind not in ("FENCE", "GUIDE"):
                        self.fail(f"REGIONS: region {name!r}: TYPE {toks[k + 2]} is not FENCE "
                                  "or GUIDE", pos)
                    k += 3
                elif toks[k] == "+":  # PROPERTY and others: skipped to the next +
                    self.skipped[f"REGIONS +{toks[k + 1] if k + 1 < len(toks) else ''}"] += 1
                    k += 2
                    while k < len(toks) and toks[k] != "+":
                        k += 1
                else:
                    self.fail(f"REGIONS: region {name!r}: unexpected {toks[k]!r}", pos)
            if not pts or len(pts) % 2:
                self.fail(f"REGIONS: region {name!r} needs pairs of corner points", pos)
            # no TYPE: read as a guide, the reading that never makes a placement infeasible
            self.regions.append((name, pts, FENCE if kind == "FENCE" else GUIDE, pos))

    def group_section(self, start: int, end: int, count: int, hpos: int) -> None:
        """``- name component-pattern ... [+ REGION region] ;``."""
        for name, toks, pos in self._statements("GROUPS", start, end, count, hpos):
            pats, region, k = [], None, 0
            while k < len(toks) and toks[k] != "+":
                pats.append(toks[k])
                k += 1
            while k < len(toks):
                w = toks[k + 1].upper() if k + 1 < len(toks) else ""
                if w == "REGION" and k + 2 < len(toks) and toks[k + 2] != "(":
                    region = toks[k + 2]
                else:  # + SOFT, + PROPERTY, an inline REGION rectangle (DEF before 5.5)
                    self.skipped[f"GROUPS +{w}"] += 1
                k += 2
                while k < len(toks) and toks[k] != "+":
                    k += 1
            self.groups.append((name, pats, region, pos))

    def cell_regions(self, names: list[str], kind: np.ndarray, dbu: float) -> CellRegions:
        """The regions with the members their groups name (cells and clusters only; other
        components are counted as skipped)."""
        n = len(names)
        if not self.regions:
            if self.groups:
                self.skipped["GROUPS without a REGION"] += len(self.groups)
            return CellRegions.empty(n)
        index = {r[0]: k for k, r in enumerate(self.regions)}
        if len(index) != len(self.regions):
            dup = next(r for k, r in enumerate(self.regions) if index[r[0]] != k)
            self.fail(f"REGIONS: region {dup[0]!r} is defined twice", dup[3])
        group_of = ["" for _ in self.regions]
        member = np.full(n, -1, np.int32)
        in_group = np.full(n, -1, np.int64)  # the group each cell joined, by its index
        lookup = {nm: i for i, nm in enumerate(names)}
        text = "\n".join(names)
        starts = np.concatenate([[0], np.cumsum([len(nm) + 1 for nm in names])[:-1]])
        for g, (gname, pats, region, pos) in enumerate(self.groups):
            if region is None:
                self.skipped["GROUPS without a REGION"] += 1
                continue
            if region not in index:
                self.fail(f"GROUPS: group {gname!r} names region {region!r}, which REGIONS "
                          "does not define", pos)
            k = index[region]
            group_of[k] = group_of[k] or gname
            hit = np.zeros(n, bool)
            for pat in pats:
                if pat in lookup:
                    hit[lookup[pat]] = True
                elif "*" in pat or "?" in pat:  # one regular-expression scan of all names
                    rx = re.compile("^" + re.escape(pat).replace(r"\*", "[^\n]*")
                                    .replace(r"\?", "[^\n]") + "$", re.M)
                    at = np.fromiter((m.start() for m in rx.finditer(text)), np.int64)
                    hit[np.searchsorted(starts, at)] = True
                else:
                    self.fail(f"GROUPS: group {gname!r}: no component named {pat!r}", pos)
            soft = (kind == CELL) | (kind == CLUSTER)
            if (hit & ~soft).any():
                self.skipped["GROUPS members that are not standard cells"] += int(
                    (hit & ~soft).sum())
            again = np.flatnonzero(hit & soft & (in_group >= 0))
            if len(again):  # a component belongs to one group (LEF/DEF Reference 5.8)
                i = int(again[0])
                self.fail(f"GROUPS: component {names[i]!r} is in group "
                          f"{self.groups[int(in_group[i])][0]!r} and again in group "
                          f"{gname!r}", pos)
            in_group[hit & soft] = g
            member[hit & soft] = k
        regs = [{"name": nm, "type": REGION_TYPES[t],
                 "rects": [[min(a[0], b[0]) / dbu, min(a[1], b[1]) / dbu,
                            max(a[0], b[0]) / dbu, max(a[1], b[1]) / dbu]
                           for a, b in zip(pts[::2], pts[1::2])],
                 "group": group_of[k] or nm}
                for k, (nm, pts, t, _) in enumerate(self.regions)]
        return CellRegions.build(n, regs, member)

    # --- assembly ----------------------------------------------------------------------------
