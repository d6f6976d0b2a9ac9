"""Reading DEF designs (:func:`read_def`) into a :class:`~floorwidget.design.Design`."""

from __future__ import annotations

import re
from collections import Counter
from collections.abc import Sequence
from decimal import Decimal
from itertools import repeat
from pathlib import Path

import numpy as np

from ...design import (
    CELL,
    CLUSTER,
    FENCE,
    FIXED,
    GUIDE,
    MAX_SITES,
    MOVABLE,
    ORIENT_CODE,
    PINNED,
    REGION_TYPES,
    TERMINAL,
    CellRegions,
    Design,
    DesignError,
    orient_size,
)
from .._io import read_text
from ._common import (
    _MATS,
    _TERMINAL_PREFIX,
    MAX_DBU,
    MAX_ROWS,
    STATUS_PROPERTY,
    _fraction,
    _warn_skipped,
    lef_path_for,
)
from .lef_reader import LefLibrary, read_lef
from .polygons import _polygon_rects
from .source import DefSource
from .specialnets import parse_specialnets, shapes_from_parsed
from .tokens import _TOK, _pack, _split_tokens, _Words, blank_comments

_DEF_SECTIONS_SKIP = {"VIAS", "STYLES", "NONDEFAULTRULES", "PINPROPERTIES", "SLOTS",
                      "FILLS", "SCANCHAINS"}
_DEF_QUIET = {"VERSION", "DIVIDERCHAR", "BUSBITCHARS", "NAMESCASESENSITIVE", "TECHNOLOGY",
              "HISTORY"}


class _Def:
    """DEF reader state: header statements go through a lazy scanner, sections are parsed
    whole with regular expressions and vectorised conversion."""

    def __init__(self, path: str, text: str, lib: LefLibrary | None):
        self.path, self.text, self.lib = path, text, lib
        self.pos = 0
        self.skipped: Counter = Counter()
        self.name = Path(path).stem
        self.dbu: float | None = None
        self.die_pts: list[tuple[float, float]] | None = None
        self.die_pos = 0  # where the DIEAREA statement starts
        self.rows: list[tuple] = []
        self.nrows = 0
        self.comps = None
        self.pins = None
        self.pin_layers: dict[str, str] = {}  # I/O pin -> layer of its first shape
        self.nets = None
        self.blockages: list[tuple[float, float, float, float]] = []
        self.blockage_density: list[float] = []  # max density per blockage (0: full)
        self.regions: list[tuple[str, list, int, int]] = []  # name, points (dbu), type, pos
        self.groups: list[tuple[str, list[str], str | None, int]] = []  # name, patterns, region
        # where things are, for writing back (:mod:`.writeback`): section -> (keyword, body,
        # END keyword, past the END); the end of UNITS; END DESIGN; per BLOCKAGES statement
        # (first rectangle, count) for placement blockages, None for the others
        self.spans: dict[str, tuple[int, int, int, int]] = {}
        self.units_end = 0
        self.design_end = 0
        self.blockage_stmts: list[tuple[int, int] | None] = []
        self.notches = 0  # blockages from a rectilinear DIEAREA, first in the design's list
        self.comp_line = 1
        self.power: dict | None = None  # SPECIALNETS power wiring (.specialnets)

    # --- locations and errors ----------------------------------------------------------------
    def line_at(self, pos: int) -> int:
        return self.text.count("\n", 0, pos) + 1

    def fail(self, msg: str, pos: int):
        raise DesignError(msg, file=self.path, line=self.line_at(pos))

    # --- header scanner ----------------------------------------------------------------------
    def tok(self) -> tuple[str | None, int]:
        m = _TOK.match(self.text, self.pos)
        if m is None:
            return None, len(self.text)
        self.pos = m.end()
        return m.group(1), m.start(1)

    def need(self, what: str) -> tuple[str, int]:
        t, p = self.tok()
        if t is None:
            self.fail(f"unexpected end of file, expected {what}", p)
        return t, p  # type: ignore[return-value]

    def statement(self, start: int) -> list[tuple[str, int]]:
        out = []
        while True:
            t, p = self.tok()
            if t is None:
                self.fail("statement not terminated by ';'", start)
            if t == ";":
                return out
            out.append((t, p))

    def number(self, t: str, p: int, what: str) -> float:
        try:
            v = float(t)
        except ValueError:
            self.fail(f"bad number {t!r} for {what}", p)
        if not np.isfinite(v):
            self.fail(f"bad number {t!r} for {what}", p)
        return v

    def points(self, toks: list[tuple[str, int]], what: str) -> list[tuple[float, float]]:
        pts = []
        k = 0
        while k < len(toks):
            t, p = toks[k]
            if t != "(":
                self.fail(f"{what}: expected '(' of a point, got {t!r}", p)
            if k + 3 >= len(toks) or toks[k + 3][0] != ")":
                self.fail(f"{what}: a point is written ( x y )", p)
            pts.append((self.number(*toks[k + 1], what), self.number(*toks[k + 2], what)))
            k += 4
        return pts

    def section_end(self, kw: str, start: int) -> tuple[int, int]:
        text = self.text
        i = text.find("END " + kw, self.pos)
        e = i + 4 + len(kw)
        if i >= 0 and (i == 0 or text[i - 1].isspace()) and (e == len(text) or text[e].isspace()):
            return i, e
        m = re.compile(r"\bEND\s+" + kw + r"\b", re.I).search(self.text, self.pos)
        if m is None:
            self.fail(f"{kw} section is not terminated (no END {kw})", start)
        return m.start(), m.end()

    def header_count(self, kw: str, start: int) -> int:
        t, p = self.need(f"the number of {kw}")
        v = self.number(t, p, f"{kw} count")
        if v < 0 or v != int(v):
            self.fail(f"{kw} count must be a whole number, got {t!r}", p)
        t2, p2 = self.need("';'")
        if t2 != ";":
            self.fail(f"expected ';' after {kw} {t}, got {t2!r}", p2)
        return int(v)

    # --- top level ---------------------------------------------------------------------------
    def parse(self) -> None:
        sections = {"COMPONENTS": self.components, "PINS": self.io_pins,
                    "NETS": self.net_section, "BLOCKAGES": self.blockage_section,
                    "REGIONS": self.region_section, "GROUPS": self.group_section,
                    "SPECIALNETS": self.specialnet_section}
        while True:
            t, p = self.tok()
            if t is None:  # a file cut short must not read as a smaller design
                self.fail("file ends without END DESIGN (cut short?)", len(self.text))
            T = t.upper()
            if T == "END":
                t2, _ = self.tok()
                if t2 is not None and t2.upper() == "DESIGN":
                    self.design_end = p
                    return
                continue
            if T in _DEF_QUIET:
                self.statement(p)
            elif T == "DESIGN":
                toks = self.statement(p)
                if toks:
                    self.name = toks[0][0]
            elif T == "UNITS":
                toks = self.statement(p)
                if len(toks) != 3 or toks[0][0].upper() != "DISTANCE" \
                        or toks[1][0].upper() != "MICRONS":
                    self.fail("expected UNITS DISTANCE MICRONS n ;", p)
                v = self.number(*toks[2], "UNITS DISTANCE MICRONS")
                if not 0 < v <= MAX_DBU or v != int(v):
                    self.fail(f"UNITS DISTANCE MICRONS must be a whole number in 1..{MAX_DBU}, "
                              f"got {toks[2][0]!r}", toks[2][1])
                self.dbu = v
                self.units_end = self.pos
            elif T == "DIEAREA":
                pts = self.points(self.statement(p), "DIEAREA")
                if len(pts) < 2 or len(pts) == 3:
                    self.fail("DIEAREA needs two corner points or a polygon of four or more", p)
                self.die_pts = pts
                self.die_pos = p
            elif T == "ROW":
                self.row(self.statement(p), p)
            elif T in ("TRACKS", "GCELLGRID", "COMPONENTMASKSHIFT"):
                self.statement(p)
                self.skipped[T] += 1
            elif T == "PROPERTYDEFINITIONS":
                s, e = self.section_end(T, p)
                self.spans.setdefault(T, (p, self.pos, s, e))
                self.pos = e
            elif T in sections:
                if T in self.spans:  # a second one would silently replace the first
                    self.fail(f"a second {T} section", p)
                n = self.header_count(T, p)
                s, e = self.section_end(T, p)
                self.spans[T] = (p, self.pos, s, e)
                sections[T](self.pos, s, n, p)
                self.pos = e
            elif T in _DEF_SECTIONS_SKIP:
                _, e = self.section_end(T, p)
                self.pos = e
                self.skipped[T] += 1
            elif T == "BEGINEXT":
                m = re.compile(r"\bENDEXT\b").search(self.text, self.pos)
                if m is None:
                    self.fail("BEGINEXT is not terminated (no ENDEXT)", p)
                self.pos = m.end()
                self.skipped[T] += 1
            else:
                self.statement(p)
                self.skipped[T] += 1

    def row(self, toks, p) -> None:
        if len(toks) < 5:
            self.fail("ROW needs: name site x y orient [DO nx BY ny [STEP sx sy]] ;", p)
        site, sp = toks[1]
        x = self.number(*toks[2], "ROW x")
        y = self.number(*toks[3], "ROW y")
        o, op = toks[4]
        if o not in ORIENT_CODE:
            self.fail(f"ROW: unknown orientation {o!r}", op)
        nx = ny = 1
        sx = sy = None
        k = 5
        while k < len(toks):
            w = toks[k][0].upper()
            if w == "DO" and k + 3 < len(toks) and toks[k + 2][0].upper() == "BY":
                nx = self.number(*toks[k + 1], "ROW DO")
                ny = self.number(*toks[k + 3], "ROW BY")
                if nx < 1 or ny < 1 or nx != int(nx) or ny != int(ny):
                    self.fail("ROW DO nx BY ny needs positive whole numbers", toks[k][1])
                if nx > MAX_SITES or ny > MAX_ROWS:
                    self.fail(f"ROW DO {toks[k + 1][0]} BY {toks[k + 3][0]}: at most {MAX_SITES} "
                              f"sites by {MAX_ROWS} rows", toks[k][1])
                k += 4
            elif w == "STEP" and k + 2 < len(toks):
                sx = self.number(*toks[k + 1], "ROW STEP")
                sy = self.number(*toks[k + 2], "ROW STEP")
                k += 3
            else:
                break  # + PROPERTY and the like
        self.nrows += int(ny)
        if self.nrows > MAX_ROWS:
            self.fail(f"more than {MAX_ROWS} rows", p)
        self.rows.append((site, sp, x, y, ORIENT_CODE[o], int(nx), int(ny), sx, sy))

    # --- COMPONENTS --------------------------------------------------------------------------
    _COMP = re.compile(
        r"\s*(?:-\s+([^\s;]+)\s+([^\s;]+)"
        r"(?:\s+\+\s*(PLACED|FIXED|COVER)\s*\(\s*([-+\d.eE]+)\s+([-+\d.eE]+)\s*\)\s*"
        r"(N|S|E|W|FN|FS|FE|FW)(?=[\s;]))?"
        r"([^;]*);|(\S[^;]*;?))")

    def _bad_statement(self, regex, start: int, end: int, group: int, what: str):
        for m in regex.finditer(self.text, start, end):
            if m.group(group):
                self.fail(f"{what}: cannot read statement {m.group(group)[:40]!r}",
                          m.start(group))
        raise AssertionError("unreachable")

    def _find(self, start: int, end: int, name: str) -> int:
        m = re.compile(r"-\s+" + re.escape(name) + r"(?=[\s;])").search(self.text, start, end)
        return m.start() if m else start

    def _split_section(self, start: int, end: int) -> _Words | None:
        """Whitespace tokens of a section, classified by numpy over the bytes; ``None`` when
        some ``;`` is glued to a word (or sits in a string), or a statement does not start
        with ``-``: the regular-expression path then reads (or rejects) the section."""
        w = _Words(self.text[start:end])
        if not w.ok:
            return None
        return w

    def components(self, start: int, end: int, count: int, hpos: int) -> None:
        self.comp_line = hpos
        sp = self._split_section(start, end)
        if sp is not None:
            return self._components_split(sp, start, end, count, hpos)
        return self._components_regex(start, end, count, hpos)

    def _components_rows(self, rows, start: int, end: int, count: int, hpos: int) -> None:
        if not rows:
            cols = [()] * 8
        else:
            cols = list(zip(*rows))
        if any(cols[7]):
            self._bad_statement(self._COMP, start, end, 8, "COMPONENTS")
        names, models = list(cols[0]), list(cols[1])
        n = len(names)
        if n != count:
            self.fail(f"COMPONENTS header says {count}, the section has {n}", hpos)
        st_map = {"PLACED": MOVABLE, "FIXED": FIXED, "COVER": FIXED, "": -1}
        status = np.fromiter(map(st_map.__getitem__, cols[2]), np.int8, n) if n else \
            np.zeros(0, np.int8)
        omap = dict(ORIENT_CODE)
        omap[""] = 0
        orient = np.fromiter(map(omap.__getitem__, cols[5]), np.int8, n) if n else \
            np.zeros(0, np.int8)
        fast = status >= 0
        x = np.full(n, np.nan)
        y = np.full(n, np.nan)
        idx = np.flatnonzero(fast)
        try:
            xs = [cols[3][i] for i in idx]
            ys = [cols[4][i] for i in idx]
            x[idx] = np.array(xs, dtype=np.float64)
            y[idx] = np.array(ys, dtype=np.float64)
        except ValueError:
            for i in idx:
                for v in (cols[3][i], cols[4][i]):
                    try:
                        float(v)
                    except ValueError:
                        self.fail(f"component {names[i]!r}: bad number {v!r}",
                                  self._find(start, end, names[i]))
        rest = cols[6]
        slow = np.flatnonzero(np.fromiter(map(bool, map(str.strip, rest)), bool, n)) if n else \
            np.zeros(0, np.intp)

        def option_text(i):
            if fast[i]:
                return f"+ {cols[2][i]} ( {cols[3][i]} {cols[4][i]} ) {cols[5][i]} {rest[i]}"
            return rest[i]

        # options beyond a leading placement: few components in practice
        self._finish_components(names, models, status, x, y, orient,
                                ((i, option_text(i)) for i in slow), start, end)

    def _components_split(self, w: _Words, start: int, end: int, count: int,
                          hpos: int) -> None:
        begin, semi = w.begin, w.semi
        n = len(begin)
        if n != count:
            self.fail(f"COMPONENTS header says {count}, the section has {n}", hpos)
        ln = semi - begin
        if (ln < 3).any():
            return self._components_regex(start, end, count, hpos)
        last = max(len(w.words) - 1, 0)
        names = w.get(begin + 1)
        models = w.get(begin + 2)
        status = np.full(n, -1, np.int8)
        orient = np.zeros(n, np.int8)
        x = np.full(n, np.nan)
        y = np.full(n, np.nan)
        plus, opn, cls = w.mask("+"), w.mask("("), w.mask(")")

        def at(mask, k):
            return mask[np.minimum(begin + k, last)]

        # "- name model + PLACED ( x y ) O ;": ten tokens before the ';'
        a = np.flatnonzero((ln == 10) & at(plus, 3) & at(opn, 5) & at(cls, 8))
        st_map = {"PLACED": MOVABLE, "FIXED": FIXED, "COVER": FIXED}
        kst, kor = w.packed(begin[a] + 4), w.packed(begin[a] + 9)
        if kst is not None and kor is not None:  # exact words compared as packed bytes
            st = np.full(len(a), -2, np.int8)
            for word, code in st_map.items():
                st[kst == _pack(word)] = code
            oc = np.full(len(a), -1, np.int8)
            for word, code in ORIENT_CODE.items():
                oc[kor == _pack(word)] = code
        else:
            st = np.fromiter(map(st_map.get, w.get(begin[a] + 4), repeat(-2)), np.int8, len(a))
            oc = np.fromiter(map(ORIENT_CODE.get, w.get(begin[a] + 9), repeat(-1)), np.int8,
                             len(a))
        good = (st >= 0) & (oc >= 0)
        a_ok = a[good]
        vx, vy = w.integers(begin[a_ok] + 6), w.integers(begin[a_ok] + 7)
        try:
            x[a_ok] = vx if vx is not None else \
                np.fromiter(map(float, w.get(begin[a_ok] + 6)), np.float64, len(a_ok))
            y[a_ok] = vy if vy is not None else \
                np.fromiter(map(float, w.get(begin[a_ok] + 7)), np.float64, len(a_ok))
        except ValueError:  # the slow path below finds the offender and names its line
            good[:] = False
            a_ok = a[good]
        status[a_ok] = st[good]
        orient[a_ok] = oc[good]
        slow = np.ones(n, bool)
        slow[a_ok] = False
        slow[ln == 3] = False  # "- name model ;": unplaced
        u = np.flatnonzero((ln == 5) & at(plus, 3))
        slow[u[np.array([t == "UNPLACED" for t in w.get(begin[u] + 4)], bool)]] = False
        toks = w.words
        # options beyond the plain forms: few components in practice
        self._finish_components(names, models, status, x, y, orient,
                                ((i, " ".join(toks[begin[i] + 3:semi[i]]))
                                 for i in np.flatnonzero(slow).tolist()), start, end)

    def _finish_components(self, names, models, status, x, y, orient, options, start: int,
                           end: int) -> None:
        """Apply the ``(index, option text)`` pairs of the components that have options beyond
        a plain placement, and keep the section's arrays."""
        n = len(names)
        halo = None
        pinned: list[int] = []
        for i, opts in options:
            r = self._comp_options(names[i], opts, start, end)
            status[i], x[i], y[i], orient[i] = r[0], r[1], r[2], r[3]
            if r[4] is not None:
                if halo is None:
                    halo = np.zeros((n, 4))
                halo[i] = r[4]
            if r[5]:
                pinned.append(int(i))
        self.comps = dict(names=names, models=models, status=status, x=x, y=y, orient=orient,
                          halo=halo, pinned=pinned, start=start, end=end)

    def _components_regex(self, start: int, end: int, count: int, hpos: int) -> None:
        rows = self._COMP.findall(self.text, start, end)
        return self._components_rows(rows, start, end, count, hpos)

    def _comp_options(self, name: str, opts: str, start: int, end: int):
        toks = _split_tokens(opts)
        status, x, y, o, halo, pinned = -1, np.nan, np.nan, 0, None, False
        k = 0

        def fail(msg):
            self.fail(f"component {name!r}: {msg}", self._find(start, end, name))

        def num(t):
            try:
                return float(t)
            except ValueError:
                fail(f"bad number {t!r}")

        while k < len(toks):
            if toks[k] != "+":
                fail(f"unexpected {toks[k]!r} (options start with '+')")
            if k + 1 >= len(toks):
                fail("'+' without an option")
            w = toks[k + 1].upper()
            k += 2
            if w in ("PLACED", "FIXED", "COVER"):
                if k + 4 >= len(toks) or toks[k] != "(" or toks[k + 3] != ")":
                    fail(f"{w} needs ( x y ) orient")
                x, y = num(toks[k + 1]), num(toks[k + 2])
                ot = toks[k + 4]
                if ot not in ORIENT_CODE:
                    fail(f"unknown orientation {ot!r}")
                o = ORIENT_CODE[ot]
                status = MOVABLE if w == "PLACED" else FIXED
                k += 5
            elif w == "UNPLACED":
                status = -1
            elif w == "HALO":
                if k < len(toks) and toks[k].upper() == "SOFT":
                    k += 1
                if k + 3 >= len(toks):
                    fail("HALO needs left bottom right top")
                halo = [num(t) for t in toks[k:k + 4]]
                k += 4
            elif w == "PROPERTY":
                while k + 1 < len(toks) and toks[k] != "+":
                    if toks[k] == STATUS_PROPERTY and toks[k + 1].strip('"').upper() == "PINNED":
                        pinned = True
                    k += 2
            else:  # SOURCE, WEIGHT, REGION, EEQMASTER, ROUTEHALO, MASKSHIFT, GENERATE
                self.skipped[f"COMPONENTS +{w}"] += 1
                while k < len(toks) and toks[k] != "+":
                    k += 1
        return status, x, y, o, halo, pinned

    # --- PINS --------------------------------------------------------------------------------
    _STMT = re.compile(r"\s*(?:-\s+([^\s;]+)([^;]*);|(\S[^;]*;?))")

    def io_pins(self, start: int, end: int, count: int, hpos: int) -> None:
        rows = self._STMT.findall(self.text, start, end)
        if any(r[2] for r in rows):
            self._bad_statement(self._STMT, start, end, 3, "PINS")
        if len(rows) != count:
            self.fail(f"PINS header says {count}, the section has {len(rows)}", hpos)
        out = []
        for name, opts, _ in rows:  # I/O pins: thousands at most
            out.append(self._pin(name, opts, start, end))
        self.pins = out

    def _pin(self, name, opts, start, end):
        toks = _split_tokens(opts)

        def fail(msg):
            self.fail(f"pin {name!r}: {msg}", self._find(start, end, name))

        def num(t):
            try:
                return float(t)
            except ValueError:
                fail(f"bad number {t!r}")

        rect = None
        place = None
        k = 0
        while k < len(toks):
            if toks[k] != "+":
                k += 1
                continue
            w = toks[k + 1].upper() if k + 1 < len(toks) else ""
            k += 1 if w == "+" else 2  # "+ +": the second one starts the next option
            if w == "LAYER" and rect is None:
                if k < len(toks):
                    self.pin_layers[name] = toks[k]
                k += 1
                while k < len(toks) and toks[k] != "(" and toks[k] != "+":
                    k += 1  # MASK n, SPACING d, DESIGNRULEWIDTH d
                if k + 7 >= len(toks) or toks[k] != "(" or toks[k + 3] != ")" \
                        or toks[k + 4] != "(" or toks[k + 7] != ")":
                    fail("LAYER needs ( x1 y1 ) ( x2 y2 )")
                rect = (num(toks[k + 1]), num(toks[k + 2]), num(toks[k + 5]), num(toks[k + 6]))
                k += 8
            elif w in ("PLACED", "FIXED", "COVER") and place is None:
                if k + 4 >= len(toks) or toks[k] != "(" or toks[k + 3] != ")":
                    fail(f"{w} needs ( x y ) orient")
                ot = toks[k + 4]
                if ot not in ORIENT_CODE:
                    fail(f"unknown orientation {ot!r}")
                place = (MOVABLE if w == "PLACED" else FIXED, num(toks[k + 1]),
                         num(toks[k + 2]), ORIENT_CODE[ot])
                k += 5
        return name, rect, place

    # --- SPECIALNETS: the power grid ---------------------------------------------------------
    def specialnet_section(self, body: int, end: int, count: int, start: int) -> None:
        if self.dbu is None:
            self.fail("SPECIALNETS before UNITS DISTANCE MICRONS", start)
        try:
            self.power = parse_specialnets(self.text[body:end], body, float(self.dbu),
                                           self.skipped)
        except DesignError as e:
            self.fail(e.message, start)

    # --- NETS --------------------------------------------------------------------------------
    _NET = re.compile(
        r"\s*(?:-\s+([^\s;]+)((?:\s*\(\s*[^\s()]+\s+[^\s()]+\s*\))*)([^;]*);|(\S[^;]*;?))")
    _PAIR = re.compile(r"\(\s*([^\s()]+)\s+([^\s()]+)\s*\)")
    _WEIGHT = re.compile(r"\+\s*WEIGHT\s+(\S+)")

    def net_section(self, start: int, end: int, count: int, hpos: int) -> None:
        sp = self._split_section(start, end)
        if sp is not None and self._nets_split(sp, start, end, count, hpos):
            return
        rows = self._NET.findall(self.text, start, end)
        cols = list(zip(*rows)) if rows else [()] * 4
        if any(cols[3]):
            self._bad_statement(self._NET, start, end, 4, "NETS")
        names = list(cols[0])
        if len(names) != count:
            self.fail(f"NETS header says {count}, the section has {len(names)}", hpos)
        pinpart, rest = cols[1], cols[2]
        self._nets_regex_rest(names, pinpart, rest, start, end)

    def _nets_regex_rest(self, names, pinpart, rest, start, end) -> None:
        m = len(names)
        deg = np.fromiter(map(str.count, pinpart, repeat("(")), np.int64, m) if m else \
            np.zeros(0, np.int64)
        pairs = self._PAIR.findall("".join(pinpart))
        weight = np.ones(m)
        # options that need a closer look: weights, SYNTHESIZED pins that stopped the fast match
        wl = np.flatnonzero(np.fromiter(map(bool, map(self._WEIGHT.search, rest)), bool, m)) \
            if m else []
        for i in wl:
            v = self._WEIGHT.search(rest[i]).group(1)
            try:
                weight[i] = float(v)
            except ValueError:
                self.fail(f"net {names[i]!r}: bad number {v!r} for WEIGHT",
                          self._find(start, end, names[i]))
        extra_net, extra_pairs = [], []
        syn = np.flatnonzero(np.fromiter(map(bool, map(re.compile(r"^\s*\(").match, rest)),
                                         bool, m)) if m else []
        for i in syn:  # pins after a '+ SYNTHESIZED' or with parenthesised names
            toks = _split_tokens(rest[i])
            k = 0
            while k + 3 < len(toks) and toks[k] == "(":
                j = toks.index(")", k) if ")" in toks[k:] else len(toks)
                extra_pairs.append((toks[k + 1], toks[k + 2]))
                extra_net.append(int(i))
                k = j + 1
        net_of = np.repeat(np.arange(m), deg)
        if extra_pairs:
            net_of = np.concatenate([net_of, np.array(extra_net, np.int64)])
            pairs = pairs + extra_pairs
            order = np.argsort(net_of, kind="stable")
            net_of = net_of[order]
            pairs = [pairs[i] for i in order]
        pc, pp = (list(c) for c in zip(*pairs)) if pairs else ([], [])
        self._nets_done(names, net_of, pc, pp, weight, start, end)

    def _nets_done(self, names, net_of, pc, pp, weight, start, end, keep=None) -> None:
        m = len(names)
        if keep is None:
            keep = np.fromiter(map("MUSTJOIN".__ne__, names), bool, m) if m else \
                np.zeros(0, bool)
        self.nets = dict(names=names, net_of=net_of, pc=pc, pp=pp, weight=weight, keep=keep,
                         start=start, end=end)
        if not keep.all():
            self.skipped["NETS MUSTJOIN"] += int((~keep).sum())

    def _nets_split(self, wd: _Words, start: int, end: int, count: int, hpos: int) -> bool:
        """Whitespace-token path; False when a statement needs the regular-expression path
        (e.g. ``+ SYNTHESIZED`` inside a connection, or a parenthesis glued to a name)."""
        begin, semi = wd.begin, wd.semi
        m = len(begin)
        if m != count:
            self.fail(f"NETS header says {count}, the section has {m}", hpos)
        if ((semi - begin) < 2).any():
            return False
        names = wd.get(begin + 1)
        big = len(wd.words)
        plus = np.flatnonzero(wd.mask("+"))
        opens = np.flatnonzero(wd.mask("("))
        if len(opens) != wd.n_open_text:
            return False
        stmt = np.searchsorted(semi, opens)
        if len(plus):
            k = np.searchsorted(plus, begin)
            first_plus = np.where(k < len(plus), plus[np.minimum(k, len(plus) - 1)], big)
            first_plus = np.minimum(first_plus, semi)
        else:
            first_plus = semi
        sel = opens < first_plus[stmt]
        po = opens[sel]
        net_of = stmt[sel]
        if len(po) and (po[-1] + 3 >= big or not wd.mask(")")[po + 3].all()):
            return False
        if len(po) and not (po[1:] >= po[:-1] + 4).all():
            return False
        weight = np.ones(m)
        w = np.flatnonzero((wd.length == 6) & (wd.first == ord("W")))
        if len(w):
            w = w[np.array([t == "WEIGHT" for t in wd.get(w)], bool)]
            w = w[wd.mask("+")[w - 1] & (w + 1 < semi[np.searchsorted(semi, w)])]
            ws = np.searchsorted(semi, w)
            for i, v in zip(ws.tolist(), wd.get(w + 1)):  # weighted nets only
                try:
                    weight[i] = float(v)
                except ValueError:
                    self.fail(f"net {names[i]!r}: bad number {v!r} for WEIGHT",
                              self._find(start, end, names[i]))
        keep = np.ones(m, bool)
        mj = np.flatnonzero((wd.length[begin + 1] == 8) & (wd.first[begin + 1] == ord("M")))
        if len(mj):
            keep[mj[np.array([t == "MUSTJOIN" for t in wd.get(begin[mj] + 1)], bool)]] = False
        self._nets_done(names, net_of, wd.get(po + 1), wd.get(po + 2), weight, start, end,
                        keep)
        return True

    # --- BLOCKAGES ---------------------------------------------------------------------------
    def _statements(self, what: str, start: int, end: int, count: int, hpos: int):
        """``(first word, tokens, position)`` of each ``- ... ;`` statement of a section (the
        position is on the statement's line), checked against the header's count."""
        stmts = list(self._STMT.finditer(self.text, start, end))
        for mt in stmts:
            if mt.group(3):
                self.fail(f"{what}: cannot read statement {mt.group(3)[:40]!r}", mt.start(3))
        if len(stmts) != count:
            self.fail(f"{what} header says {count}, the section has {len(stmts)}", hpos)
        return [(mt.group(1), _split_tokens(mt.group(2)), mt.start(1)) for mt in stmts]

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
    def design(self) -> Design:
        if self.dbu is None:
            self.fail("no UNITS DISTANCE MICRONS statement", 0)
        dbu = float(self.dbu)  # type: ignore[arg-type]
        lib = self.lib
        if self.die_pts is None:
            self.fail("no DIEAREA statement", 0)
        pts = np.array(self.die_pts, dtype=np.float64) / dbu
        die = np.array([pts[:, 0].min(), pts[:, 1].min(), pts[:, 0].max(), pts[:, 1].max()])
        blk = [np.array(self.blockages, dtype=np.float64).reshape(-1, 4) / dbu]
        dens = [np.array(self.blockage_density, dtype=np.float64)]
        if len(pts) > 2:
            try:
                blk.insert(0, _polygon_rects(pts, False))
            except ValueError as e:
                self.fail(f"DIEAREA: {e}", self.die_pos)
            dens.insert(0, np.zeros(len(blk[0])))
            self.notches = len(blk[0])
        blockages = np.concatenate(blk)
        blockage_density = np.concatenate(dens)

        # rows
        rows = {"x": [], "y": [], "height": [], "site_width": [], "num_sites": [], "orient": []}
        for site, sp, x, y, o, nx, ny, sx, sy in self.rows:
            if lib is None or site not in lib.sites:
                self.fail(f"ROW: site {site!r} is not defined in the LEF library"
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
        if self.rows:
            rows = {k: np.concatenate(v) for k, v in rows.items()}
            rows["site_name"] = self.rows[0][0]
            rx = np.array(rows["x"])
            xhi = rx + np.array(rows["site_width"]) * np.array(rows["num_sites"])
            ry = np.array(rows["y"])
            core = np.array([rx.min(), ry.min(), xhi.max(), (ry + np.array(rows["height"])).max()])
        else:
            core = die
        ccx, ccy = (core[0] + core[2]) / 2, (core[1] + core[3]) / 2

        # components
        c = self.comps or dict(names=[], models=[], status=np.zeros(0, np.int8), x=np.zeros(0),
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
            self.fail(f"component {c['names'][i]!r}: unknown LEF macro {unknown[0]!r}{hint}",
                      self._find(c["start"], c["end"], c["names"][i]))
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
                self.fail(f"component {c['names'][i]!r}: + HALO on a standard cell (LEF macro "
                          f"{c['models'][i]!r}, CLASS {macros[c['models'][i]].cls}); halos "
                          "belong to macros", self._find(c["start"], c["end"], c["names"][i]))
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
        pins = self.pins or []
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
        nt = self.nets or dict(names=[], net_of=np.zeros(0, np.int64), pc=[], pp=[],
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
                self.skipped["NETS ( * pin )"] += int(star.sum())
                keep_pin = keep_pin & ~star
        bad = np.flatnonzero((ci < 0) & keep_pin)
        if len(bad):
            j = int(bad[0])
            k = int(net_of[j])
            what = (f"unknown I/O pin {pp[j]!r}" if is_io[j] else f"unknown component {pc[j]!r}")
            self.fail(f"net {nt['names'][k]!r}: {what}",
                      self._find(nt["start"], nt["end"], nt["names"][k]))
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
                self.fail(f"net {nt['names'][k]!r}: component {pc[j]!r} (LEF macro {mdl!r}) "
                          f"has no pin {pp[j]!r} with a shape",
                          self._find(nt["start"], nt["end"], nt["names"][k]))
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
            self.skipped["NETS without pins"] += ndrop

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
        regions = self.cell_regions(names, np.concatenate([kind, np.full(nt_, TERMINAL,
                                                                            np.int8)]), dbu)
        if self.skipped:
            _warn_skipped(self.path, self.skipped)
        try:
            design = Design(
                self.name, die, names,
                np.concatenate([kind, np.full(nt_, TERMINAL, np.int8)]),
                np.concatenate([width, t_w]), np.concatenate([height, t_h]),
                net_start, ci[pin_keep], dx[pin_keep], dy[pin_keep],
                halo=halo, orient_allowed=np.concatenate([allowed, t_allowed]),
                net_names=net_names, net_weight=nt["weight"][net_keep], pin_names=pin_names,
                rows=rows if self.rows else None, blockages=blockages,
                blockage_max_density=blockage_density, regions=regions, block_type=block_type,
                x=np.concatenate([x, t_x]), y=np.concatenate([y, t_y]),
                orient=np.concatenate([orient, np.array(t_o, np.int8)]),
                status=np.concatenate([status, np.array(t_s, np.int8)]),
                dbu=int(dbu))
        except DesignError as e:  # validation of the assembled design: name the file
            line = None
            m = re.fullmatch(r"row (\d+)", e.where or "")
            if m and self.rows:  # a row problem: the line of its ROW statement
                first = np.cumsum([r[6] for r in self.rows])
                k = int(np.searchsorted(first, int(m.group(1)), side="right"))
                line = self.line_at(self.rows[min(k, len(self.rows) - 1)][1])
            msg = e.message
            m = re.fullmatch(r"region '(.*)'", e.where or "")
            reg = [r for r in self.regions if m and r[0] == m.group(1)]
            if reg:  # a region problem: the line of its REGIONS statement, its type named
                line = self.line_at(reg[0][3])
                msg = msg.replace(e.where, f"{REGION_TYPES[reg[0][2]]} {e.where}", 1)
            raise DesignError(msg, file=self.path, line=line, problems=e.problems,
                              where=e.where) from None
        design.source = self.path
        return design


def read_def(path: str | Path, lef: str | Path | Sequence[str | Path] | None = None) -> Design:
    """Read a DEF design, resolving components in the LEF library.

    Parameters
    ----------
    path : path
        The ``.def`` file.
    lef : path or list of paths, optional
        LEF files (technology first).  When none is given and ``<stem>.lef`` exists beside the
        DEF, that file is used (the convention of :func:`write_def_pair`).

    Returns
    -------
    Design
        Positions in µm; ``design.dbu`` is the DEF's ``UNITS DISTANCE MICRONS``; the input
        placement is ``design.initial``; ``block_type`` holds the LEF macro of each component
        and ``pin_names`` the pin of each net connection.

    Raises
    ------
    DesignError
        ``file:line`` of the first problem: unterminated section, unknown LEF macro, unknown
        component or pin in a net, bad number, count disagreeing with a section header,
        missing LEF; or every problem the assembled design's validation finds.

    Examples
    --------
    >>> design = read_def("blk.def", lef=["tech.lef", "blk_macros.lef"])   # doctest: +SKIP
    >>> design.initial.position("u_ram0")                                   # doctest: +SKIP
    """
    path = Path(path)
    if isinstance(lef, (str, Path)):
        lef = [lef]
    lef = list(lef or [])
    if not lef and lef_path_for(path).is_file():
        lef = [lef_path_for(path)]
    source = read_text(path)
    lib = read_lef(lef) if lef else None
    r = _Def(str(path), blank_comments(source), lib)  # positions stay those of the source
    r.parse()
    design = r.design()
    design.lef_files = [str(p) for p in lef]  # the library the masters and pin names refer to
    design.routing_layers = list(lib.layers) if lib is not None else []
    design.io_layers = {nm: r.pin_layers[p[0]] for nm, p in
                        zip(design.names[len(design.names) - len(r.pins or []):], r.pins or [])
                        if p[0] in r.pin_layers}
    if r.power is not None:
        design.power = shapes_from_parsed(r.power, design.routing_layers)
    design.def_source = DefSource.keep(source, r, design)
    return design
