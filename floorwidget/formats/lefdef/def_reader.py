"""Reading DEF designs (:func:`read_def`) into a :class:`~floorwidget.design.Design`."""

from __future__ import annotations

import re
from collections import Counter
from collections.abc import Sequence
from itertools import repeat
from pathlib import Path

import numpy as np

from ...design import (
    FIXED,
    MAX_SITES,
    MOVABLE,
    ORIENT_CODE,
    Design,
    DesignError,
)
from .._io import read_text
from ._common import (
    MAX_DBU,
    MAX_ROWS,
    STATUS_PROPERTY,
    lef_path_for,
)
from .def_assemble import assemble
from .def_constraints import _ConstraintSections
from .lef_reader import LefLibrary, read_lef
from .source import DefSource
from .specialnets import parse_specialnets, shapes_from_parsed
from .tokens import _TOK, _pack, _split_tokens, _Words, blank_comments

_DEF_SECTIONS_SKIP = {"VIAS", "STYLES", "NONDEFAULTRULES", "PINPROPERTIES", "SLOTS",
                      "FILLS", "SCANCHAINS"}
_DEF_QUIET = {"VERSION", "DIVIDERCHAR", "BUSBITCHARS", "NAMESCASESENSITIVE", "TECHNOLOGY",
              "HISTORY"}


class _Def(_ConstraintSections):
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
        self.pin_dirs: dict[str, str] = {}  # I/O pin -> + DIRECTION
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

    def _option_checks(self, what: str, name: str, start: int, end: int):
        """``fail(message)`` and ``num(token)`` for the options of the statement ``- name`` of
        a section between ``start`` and ``end``: errors name the object (``what name``) and the
        line of its statement."""

        def fail(msg):
            self.fail(f"{what} {name!r}: {msg}", self._find(start, end, name))

        def num(t):
            try:
                return float(t)
            except ValueError:
                fail(f"bad number {t!r}")

        return fail, num

    def _comp_options(self, name: str, opts: str, start: int, end: int):
        toks = _split_tokens(opts)
        status, x, y, o, halo, pinned = -1, np.nan, np.nan, 0, None, False
        k = 0
        fail, num = self._option_checks("component", name, start, end)
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
        fail, num = self._option_checks("pin", name, start, end)
        rect = None
        place = None
        k = 0
        while k < len(toks):
            if toks[k] != "+":
                k += 1
                continue
            w = toks[k + 1].upper() if k + 1 < len(toks) else ""
            k += 1 if w == "+" else 2  # "+ +": the second one starts the next option
            if w == "DIRECTION" and k < len(toks):
                self.pin_dirs[name] = toks[k].upper()
                k += 1
            elif w == "LAYER" and rect is None:
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

    def design(self) -> Design:
        """The design the parsed DEF makes (:func:`.def_assemble.assemble`)."""
        return assemble(self)


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
    design.io_directions = {nm: r.pin_dirs[p[0]] for nm, p in
                            zip(design.names[len(design.names) - len(r.pins or []):],
                                r.pins or []) if p[0] in r.pin_dirs}
    if r.power is not None:
        design.power = shapes_from_parsed(r.power, design.routing_layers)
    design.def_source = DefSource.keep(source, r, design)
    return design
