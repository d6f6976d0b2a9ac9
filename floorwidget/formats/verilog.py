"""Reading structural (gate-level) Verilog netlists: :func:`read_verilog`.

A synthesised netlist is a set of modules whose bodies only declare ports and wires, connect
nets with ``assign`` and instantiate library cells, SRAM macros or other modules of the file.
This reader keeps exactly that subset (IEEE Std 1364-2005, the structural part) and resolves
every leaf instance in a LEF library.

What is read
------------
* ``module NAME ( ports ) ; ... endmodule``, with the port list in the old style (names, then
  ``input``/``output``/``inout`` declarations in the body) or the ANSI style (directions and
  ranges in the header).
* ``input``, ``output``, ``inout``, ``wire``, ``tri``, ``supply0``, ``supply1`` declarations with an
  optional range ``[msb:lsb]`` (either order); ``wire a = b;`` reads as an assign.
* ``assign lhs = rhs, ... ;`` between nets, bit for bit: the nets are merged (a constant on the
  right leaves the left net as it is).
* Instances with named port connections ``.PIN(expr)``: an identifier, a bit ``a[3]``, a part
  ``a[7:4]``, a constant (``1'b0``, ``8'hff``: left unconnected), a concatenation ``{a, b[1:0]}``
  (its first element takes the most significant bits) or a replication ``{4{a}}``, or nothing.
* Escaped identifiers ``\\name[3].x `` (ended by white space).  As in DEF, the bus brackets
  inside such a name are written ``\\[`` and ``\\]`` in our names, so that ``\\ram[0].u `` is
  ``ram\\[0\\].u``, a bit of a bus declared ``[3:0] d`` is ``d[3]``.
* Comments, `` `timescale`` and other compiler directives (skipped), ``(* attributes *)``.

Not read: positional connections, instance arrays, parameters that change a module, gates
(``and``, ``or``: a structural netlist instantiates library cells), behavioural code.  Each is
refused with the file and line.  Buses, constants and replications wider than
:data:`MAX_BITS` are refused too.  An escaped identifier containing ``//`` or ``/*`` would be
cut by the comment rule.

Hierarchy is flattened: an instance of a module of the file contributes its own instances,
named ``<instance>/<name>``, and its internal nets, named likewise; its ports become the nets
connected to them.  The top module is ``top=`` or the one module that no other instantiates.

Masters come from the LEF library as the DEF reader takes them (LEF ``CLASS BLOCK`` -> macro,
``CORE`` -> standard cell, ...; :mod:`floorwidget.formats.lefdef`); a connection to a bus pin
``addr[7:0]`` of a LEF macro maps the expression's bits to the pins ``addr[7]`` ... ``addr[0]``
(most significant first).  Top-level ports become I/O terminals, one per bit, named as DEF
names them (``axi_req_o[3]``).

Speed
-----
The text is split into tokens by one regular expression (``re.findall``) in which an instance
whose connections all have the simple forms ``.P(net)``, ``.P(net[3])`` or ``.P()`` is a single
token (its connections are split by a second expression and resolved while flattening); the
rest is read by one pass over the token list.  Line numbers are worked out only when there is
an error to report.  On a 25 MB netlist of 145,776 instances the whole reader takes about 4 s
of CPU; see ``DEVELOPERS.md`` and ``benchmarks/bench_netlist.py`` for the measurement against
a full SystemVerilog front end.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..design import TERMINAL, DesignError
from ._io import read_text

__all__ = ["MAX_BITS", "Netlist", "read_verilog"]

VERILOG_SUFFIXES = (".v",)
#: Widest bus, constant or replication taken (bits); a wider one is refused (it would be a
#: damaged file, and a billion-bit range would only exhaust memory).
MAX_BITS = 1 << 16

_ID = r"[A-Za-z_][\w$]*"
_NAME = rf"(?:{_ID}|\\\S+\s)"  # an identifier, or an escaped one with its ending white space
_CONN = rf"\.\s*{_ID}\s*\(\s*(?:{_NAME}(?:\s*\[\s*\d+\s*\])?)?\s*\)"  # .P(n), .P(n[3]), .P()
_TOKEN = re.compile(
    # a whole instance whose connections are all of the simple forms: one token
    rf"(?!(?:module|macromodule|endmodule)\b){_ID}\s+{_NAME}\s*\("
    rf"\s*(?:{_CONN}\s*(?:,\s*{_CONN}\s*)*)?\)\s*;"
    rf"|{_CONN}"                                        # one simple connection
    r"|\\\S+"                                           # escaped identifier
    r"|[A-Za-z_][\w$]*"                                 # identifier or keyword
    r"|\d*\s*'\s*[sS]?[bBoOdDhH]\s*[0-9a-fA-FxXzZ_?]+"  # based constant
    r"|\d+"                                             # decimal number
    r"|\S")                                             # punctuation
_HEAD = re.compile(rf"({_ID})\s+({_NAME})\s*\(")
_PARTS = re.compile(rf"\.\s*({_ID})\s*\(\s*({_NAME})?\s*(?:\[\s*(\d+)\s*\])?\s*\)")
_SKIP = re.compile(r"/\*.*?\*/|//[^\n]*|\(\*.*?\*\)|^[ \t]*`[^\n]*", re.S | re.M)
_DIRS = {"input", "output", "inout"}
_NETS = {"wire", "tri", "supply0", "supply1", "wand", "wor", "tri0", "tri1", "uwire"}
_QUIET = {"parameter", "localparam", "defparam", "timeunit", "timeprecision"}
_TYPE_WORDS = {"signed", "reg", "logic"}
_GATES = {"and", "nand", "or", "nor", "xor", "xnor", "buf", "not", "bufif0", "bufif1",
          "notif0", "notif1"}
_REFUSED = {"always", "initial", "generate", "function", "task", "reg", "integer", "specify"}


@dataclass
class Netlist:
    """A flattened structural netlist with its masters resolved in a LEF library.

    Blocks are the leaf instances (in file order, depth first through the hierarchy) followed
    by the I/O terminals (one per port bit).  Nets are in CSR form like :class:`Design`'s.

    Attributes
    ----------
    name : str
        The top module.
    names, masters : list of str
        Block names (instances, then terminals) and the LEF macro of each instance ('' for
        terminals).
    kind : (n,) int8
        Kind codes (:data:`floorwidget.design.MACRO`, ``CELL``, ``TERMINAL`` ...).
    width, height : (n,) float64
        Footprint in the N orientation, µm (0 for terminals: the floorplan sizes them).
    orient_allowed : (n,) uint8
        From the LEF ``SYMMETRY`` (N only for terminals).
    directions : list of str
        ``input`` / ``output`` / ``inout`` of each terminal.
    net_names : list of str
    net_start, pin_block : int64 arrays
    pin_dx, pin_dy : float64 arrays
        Offset from the block centre (N), from the LEF pin.
    pin_names : list of str
        LEF pin of each connection ('' for a terminal).
    source : str
        The file read.
    """

    name: str
    names: list[str]
    masters: list[str]
    kind: np.ndarray
    width: np.ndarray
    height: np.ndarray
    orient_allowed: np.ndarray
    directions: list[str]
    net_names: list[str]
    net_start: np.ndarray
    pin_block: np.ndarray
    pin_dx: np.ndarray
    pin_dy: np.ndarray
    pin_names: list[str]
    source: str = ""

    @property
    def terminals(self) -> np.ndarray:
        """Indices of the I/O terminals."""
        return np.flatnonzero(self.kind == TERMINAL)


# ---------------------------------------------------------------------------------------------
# parsing: tokens -> modules


@dataclass
class _Module:
    name: str
    tok: int                                   # token index of the name (for errors)
    ports: list[str] = field(default_factory=list)
    dirs: dict[str, str] = field(default_factory=dict)
    ranges: dict[str, tuple[int, int] | None] = field(default_factory=dict)
    assigns: list[tuple[list, list, int]] = field(default_factory=list)
    # instances: (master, name, connections, token index); a connection is (pin, atoms), or
    # (pin, net, bit) text of a simple connection
    insts: list[tuple[str, str, list, int]] = field(default_factory=list)


def _ident(t: str) -> str:
    """Our name for an identifier token: escaped ones lose the backslash and have their
    brackets escaped as DEF does."""
    if t[0] == "\\":
        return t[1:].replace("[", "\\[").replace("]", "\\]")
    return t


def _is_ident(t: str) -> bool:
    c = t[0]
    return c.isalpha() or c == "_" or c == "\\"


class _Parser:
    def __init__(self, text: str, path: str):
        self.path = path
        self.text = _SKIP.sub(lambda m: "\n" * m.group().count("\n"), text)
        self.toks = _TOKEN.findall(self.text)
        self.i = 0

    # errors ---------------------------------------------------------------------------------
    def line_of(self, k: int) -> int:
        """Line of token ``k`` (found again by the same tokeniser; only on errors)."""
        pos = 0
        for j, m in enumerate(_TOKEN.finditer(self.text)):
            pos = m.start()
            if j >= k:
                break
        return self.text.count("\n", 0, pos) + 1

    def fail(self, msg: str, k: int | None = None):
        raise DesignError(msg, file=self.path, line=self.line_of(self.i if k is None else k))

    def next(self, what: str) -> str:
        if self.i >= len(self.toks):
            self.fail(f"unexpected end of file, expected {what}", len(self.toks) - 1)
        t = self.toks[self.i]
        self.i += 1
        return t

    def expect(self, t: str) -> None:
        got = self.next(repr(t))
        if got != t:
            self.fail(f"expected {t!r}, found {got!r}", self.i - 1)

    def name(self, what: str) -> str:
        t = self.next(what)
        if not _is_ident(t):
            self.fail(f"expected {what}, found {t!r}", self.i - 1)
        return _ident(t)

    def int_(self, what: str) -> int:
        t = self.next(what)
        if not t.isdigit():
            self.fail(f"expected {what} (a whole number), found {t!r}", self.i - 1)
        if len(t) > 9:
            self.fail(f"{what}: {t[:12]}... is too large", self.i - 1)
        return int(t)

    def range_(self) -> tuple[int, int] | None:
        if self.i < len(self.toks) and self.toks[self.i] == "[":
            self.i += 1
            msb = self.int_("the range's first bound")
            self.expect(":")
            lsb = self.int_("the range's second bound")
            self.expect("]")
            if abs(msb - lsb) >= MAX_BITS:
                self.fail(f"range [{msb}:{lsb}] is wider than {MAX_BITS} bits", self.i - 1)
            return msb, lsb
        return None

    def skip_to(self, end: str) -> None:
        toks, n = self.toks, len(self.toks)
        while self.i < n and toks[self.i] != end:
            self.i += 1
        self.expect(end)

    # structure ------------------------------------------------------------------------------
    def modules(self) -> dict[str, _Module]:
        try:
            return self._modules()
        except IndexError:  # a look-ahead past the last token
            self.fail("unexpected end of file", len(self.toks) - 1)

    def _modules(self) -> dict[str, _Module]:
        mods: dict[str, _Module] = {}
        toks = self.toks
        while self.i < len(toks):
            t = self.next("module")
            if t not in ("module", "macromodule"):
                self.fail(f"expected 'module', found {t!r}", self.i - 1)
            k = self.i
            m = _Module(self.name("module name"), k)
            if m.name in mods:
                self.fail(f"module {m.name!r} defined twice", k)
            mods[m.name] = m
            self.header(m)
            self.body(m)
        if not mods:
            raise DesignError("no module in the file", file=self.path,
                              line=self.text.count("\n") + 1)
        return mods

    def header(self, m: _Module) -> None:
        if self.toks[self.i] == "#":
            self.fail(f"module {m.name!r}: parameters are not supported in a structural netlist")
        if self.toks[self.i] == ";":
            self.i += 1
            return
        self.expect("(")
        d = None
        rng = None
        while True:
            t = self.next("a port or ')'")
            if t == ")":
                break
            if t == ",":
                continue
            if t in _DIRS:
                d, rng = t, None
                continue
            if t in _NETS or t in _TYPE_WORDS:
                continue
            if t == "[":
                self.i -= 1
                rng = self.range_()
                continue
            if not _is_ident(t):
                self.fail(f"module {m.name!r}: unexpected {t!r} in the port list", self.i - 1)
            nm = _ident(t)
            m.ports.append(nm)
            if d is not None:
                m.dirs[nm] = d
                m.ranges[nm] = rng
        self.expect(";")

    def body(self, m: _Module) -> None:
        toks = self.toks
        while True:
            k = self.i
            t = self.next("'endmodule'")
            if t == "endmodule":
                return
            if t == ";":
                continue
            if t in _DIRS or t in _NETS:
                self.declaration(m, t, k)
            elif t == "assign":
                while True:
                    lhs = self.expr()
                    self.expect("=")
                    rhs = self.expr()
                    m.assigns.append((lhs, rhs, k))
                    s = self.next("',' or ';'")
                    if s == ";":
                        break
                    if s != ",":
                        self.fail(f"expected ',' or ';' after an assign, found {s!r}", self.i - 1)
            elif t in _QUIET:
                self.skip_to(";")
            elif t in _GATES or t in _REFUSED or t in ("module", "macromodule"):
                self.fail(f"module {m.name!r}: {t!r} is not structural netlist content "
                          "(not supported)", k)
            elif t[-1] == ";" and len(t) > 1:  # a whole simple instance
                self.simple_instance(m, t, k)
            elif _is_ident(t):
                self.instance(m, _ident(t), k)
            else:
                self.fail(f"module {m.name!r}: unexpected {t!r}", k)
            if self.i >= len(toks):
                self.fail(f"module {m.name!r} has no 'endmodule'", m.tok)

    def declaration(self, m: _Module, kw: str, k: int) -> None:
        toks = self.toks
        while self.i < len(toks) and (toks[self.i] in _NETS or toks[self.i] in _TYPE_WORDS):
            self.i += 1
        rng = self.range_()
        while True:
            j = self.i
            nm = self.name("a net name")
            if kw in _DIRS:
                if nm not in m.ports:
                    self.fail(f"module {m.name!r}: {kw} {nm!r} is not in the port list", j)
                m.dirs[nm] = kw
                m.ranges[nm] = rng
            elif nm not in m.ranges or m.ranges[nm] is None:
                m.ranges[nm] = rng
            s = self.next("',' or ';'")
            if s == "=":
                m.assigns.append(([("s", nm, None, None)], self.expr(), j))
                s = self.next("',' or ';'")
            if s == ";":
                return
            if s != ",":
                self.fail(f"expected ',' or ';' in a declaration, found {s!r}", self.i - 1)

    def simple_instance(self, m: _Module, t: str, k: int) -> None:
        """An instance read in one token: ``master name (.P(n), .Q(n[3]), .R());``; its
        connections stay ``(pin, net, bit)`` text for :meth:`_Flat.flatten`."""
        h = _HEAD.match(t)
        m.insts.append((h.group(1), _ident(h.group(2).rstrip()), _PARTS.findall(t, h.end()), k))

    def instance(self, m: _Module, master: str, k: int) -> None:
        if self.toks[self.i] == "#":
            self.fail(f"instance of {master!r}: parameter overrides are not supported")
        while True:
            j = self.i
            inst = self.name(f"an instance name of {master!r}")
            if self.toks[self.i] == "[":
                self.fail(f"instance {inst!r}: instance arrays are not supported")
            self.expect("(")
            try:
                conns = self.connections(inst)
            except IndexError:
                self.fail("unexpected end of file in an instance", len(self.toks) - 1)
            m.insts.append((master, inst, conns, j))
            s = self.next("';'")
            if s == ";":
                return
            if s != ",":
                self.fail(f"instance {inst!r}: expected ';', found {s!r}", self.i - 1)

    def connections(self, inst: str) -> list:
        """Named connections up to the closing ``)``; a simple one (one token) stays
        ``(pin, net, bit)`` text, like those of :meth:`simple_instance`."""
        toks = self.toks
        i = self.i
        conns: list = []
        if toks[i] == ")":
            self.i = i + 1
            return conns
        while True:
            t = toks[i]
            if t[0] == "." and len(t) > 1:  # a whole ".P(net)", ".P(net[3])" or ".P()" token
                conns.append(_PARTS.match(t).groups(""))
                i += 1
            elif t != "." or toks[i + 2] != "(" or not _is_ident(toks[i + 1]):
                self.i = i
                self.fail(f"instance {inst!r}: only named connections .PIN(net) are "
                          f"supported, found {t!r}")
            else:
                pin = _ident(toks[i + 1])
                self.i = i + 3
                atoms = self.expr() if toks[i + 3] != ")" else []
                self.expect(")")
                conns.append((pin, atoms))
                i = self.i
            s = toks[i]
            i += 1
            if s == ")":
                self.i = i
                return conns
            if s != ",":
                self.i = i - 1
                self.fail(f"instance {inst!r}: expected ',' or ')', found {s!r}")

    def expr(self) -> list:
        """Atoms, most significant first: ``("s", name, msb, lsb)`` (whole signal when the
        bounds are None) or ``("c", width)`` for a constant."""
        t = self.next("an expression")
        if t == "{":
            toks = self.toks
            if toks[self.i].isdigit() and self.i + 1 < len(toks) and toks[self.i + 1] == "{":
                n = self.int_("a replication count")  # {n{...}}
                self.expect("{")
                inner = self.concat_rest()
                self.expect("}")
                if n * _width(inner) > MAX_BITS:
                    self.fail(f"a replication wider than {MAX_BITS} bits", self.i - 1)
                return inner * n
            return self.concat_rest()
        if "'" in t or t.isdigit():
            w = _const_width(t)
            if w > MAX_BITS:
                self.fail(f"constant {t[:12]} is wider than {MAX_BITS} bits", self.i - 1)
            return [("c", w)]
        if not _is_ident(t):
            self.fail(f"expected a net, a constant or '{{', found {t!r}", self.i - 1)
        nm = _ident(t)
        if self.i < len(self.toks) and self.toks[self.i] == "[":
            self.i += 1
            a = self.int_("a bit index")
            b = a
            if self.toks[self.i] == ":":
                self.i += 1
                b = self.int_("a bit index")
            self.expect("]")
            return [("s", nm, a, b)]
        return [("s", nm, None, None)]

    def concat_rest(self) -> list:
        out: list = []
        while True:
            out += self.expr()
            s = self.next("',' or '}'")
            if s == "}":
                return out
            if s != ",":
                self.fail(f"expected ',' or '}}' in a concatenation, found {s!r}", self.i - 1)


def _width(atoms: list) -> int:
    """Bits of an expression, counting a whole signal as one (a lower bound)."""
    return sum(a[1] if a[0] == "c" else 1 if a[2] is None else abs(a[2] - a[3]) + 1
               for a in atoms)


def _const_width(t: str) -> int:
    if "'" not in t:
        return 32
    size, _, rest = t.partition("'")
    size = size.strip()
    if size:
        return max(int(size), 1) if len(size) <= 9 else MAX_BITS + 1
    rest = rest.strip().lstrip("sS")
    digits = len(re.sub(r"[\s_]", "", rest[1:]))
    return {"b": 1, "o": 3, "h": 4}.get(rest[0].lower(), 32) * digits if rest[0] in "bBoOhH" \
        else 32


# ---------------------------------------------------------------------------------------------
# elaboration: modules -> flat instances and net bits


class _Flat:
    """Flattening state: net bits are integers; ``pairs`` are assigns to merge."""

    def __init__(self, parser: _Parser, mods: dict[str, _Module], lib):
        self.p = parser
        self.mods = mods
        self.lib = lib
        self.net_names: list[str] = []
        self.inst_names: list[str] = []
        self.inst_master: list[str] = []
        self.pin_net: list[int] = []
        self.pin_inst: list[int] = []
        self.pin_name: list[str] = []
        self.pairs: list[tuple[int, int]] = []
        self.bus_pins: dict[tuple[str, str], list[str] | None] = {}

    def signals(self, m: _Module, prefix: str, given: dict[str, list[int]]) -> dict:
        """Net bits of every signal of ``m`` (a list, most significant first); ``given``
        supplies the ports' bits from the parent."""
        table: dict[str, list[int]] = {}
        names = self.net_names
        for nm in sorted(m.ranges, key=lambda s: s not in m.dirs):  # ports first
            rng = m.ranges[nm]
            if nm in given:
                table[nm] = given[nm]
                continue
            if rng is None:
                table[nm] = [len(names)]
                names.append(prefix + nm)
            else:
                a, b = rng
                idx = range(a, b - 1, -1) if a >= b else range(a, b + 1)
                start = len(names)
                names.extend(f"{prefix}{nm}[{i}]" for i in idx)
                table[nm] = list(range(start, len(names)))
        return table

    def bits(self, m: _Module, table: dict, prefix: str, atoms: list, k: int) -> list[int]:
        out: list[int] = []
        for a in atoms:
            if a[0] == "c":
                out.extend([-1] * a[1])
                continue
            _, nm, hi, lo = a
            b = table.get(nm)
            if b is None:  # an implicit net (a scalar wire)
                if hi is not None:
                    self.p.fail(f"module {m.name!r}: net {nm!r} is not declared", k)
                b = table[nm] = [len(self.net_names)]
                m.ranges.setdefault(nm, None)
                self.net_names.append(prefix + nm)
            if hi is None:
                out.extend(b)
                continue
            rng = m.ranges.get(nm)
            if rng is None:
                self.p.fail(f"module {m.name!r}: {nm!r} is a scalar, not a bus", k)
            msb, lsb = rng
            step = -1 if msb >= lsb else 1
            for x in (hi, lo):
                if not (min(msb, lsb) <= x <= max(msb, lsb)):
                    self.p.fail(f"module {m.name!r}: bit {x} of {nm!r} is outside "
                                f"[{msb}:{lsb}]", k)
            i0, i1 = (hi - msb) * step, (lo - msb) * step
            out.extend(b[i0:i1 + 1] if i1 >= i0 else b[i1:i0 + 1][::-1])
        return out

    def atoms_of(self, conn: tuple[str, str, str], k: int) -> tuple[str, list]:
        """``(pin, atoms)`` of a simple connection's ``(pin, net, bit)`` text."""
        pin, net, bit = conn
        if not net:
            return pin, []
        if net[0] == "\\":
            net = _ident(net.rstrip())
        if not bit:
            return pin, [("s", net, None, None)]
        if len(bit) > 9:
            self.p.fail(f"pin {pin!r}: bit index {bit[:12]}... is too large", k)
        return pin, [("s", net, int(bit), int(bit))]

    def leaf_pins(self, master: str, pin: str, width: int, inst: str, k: int) -> list[str]:
        """LEF pin names for ``width`` bits connected to ``pin`` (most significant first)."""
        mac = self.lib.macros[master]
        if pin in mac.pins:
            if width != 1:
                self.p.fail(f"instance {inst!r}: pin {pin!r} of {master!r} is one bit, the "
                            f"connection {width}", k)
            return [pin]
        key = (master, pin)
        bus = self.bus_pins.get(key)
        if key not in self.bus_pins:
            pat = re.compile(re.escape(pin) + r"\[(\d+)\]$")
            idx = sorted(((int(mm.group(1)), p) for p in mac.pins
                          if (mm := pat.match(p))), reverse=True)
            bus = self.bus_pins[key] = [p for _, p in idx] or None
        if bus is None:
            self.p.fail(f"instance {inst!r}: LEF macro {master!r} has no pin {pin!r}", k)
        if len(bus) != width:
            self.p.fail(f"instance {inst!r}: pin {pin!r} of {master!r} has {len(bus)} bits, "
                        f"the connection {width}", k)
        return bus

    def flatten(self, m: _Module, prefix: str, given: dict, stack: tuple) -> None:
        table = self.signals(m, prefix, given)
        for lhs, rhs, k in m.assigns:
            a = self.bits(m, table, prefix, lhs, k)
            b = self.bits(m, table, prefix, rhs, k)
            if -1 in a:
                self.p.fail(f"module {m.name!r}: a constant on the left of an assign", k)
            if all(x < 0 for x in b):
                continue  # tied to a constant: left unconnected
            if len(a) != len(b):
                self.p.fail(f"module {m.name!r}: assign of {len(b)} bits to {len(a)}", k)
            self.pairs.extend((x, y) for x, y in zip(a, b) if y >= 0)
        macros = self.lib.macros if self.lib is not None else {}
        for master, inst, conns, k in m.insts:
            full = prefix + inst
            sub = self.mods.get(master)
            if sub is not None:
                conns = [self.atoms_of(c, k) if len(c) == 3 else c for c in conns]
                if master in stack:
                    self.p.fail(f"module {master!r} instantiates itself", k)
                given = {}
                for pin, atoms in conns:
                    if pin not in sub.dirs:
                        self.p.fail(f"instance {full!r}: module {master!r} has no port {pin!r}",
                                    k)
                    if not atoms:
                        continue
                    b = self.bits(m, table, prefix, atoms, k)
                    rng = sub.ranges.get(pin)
                    w = 1 if rng is None else abs(rng[0] - rng[1]) + 1
                    if len(b) != w:
                        self.p.fail(f"instance {full!r}: port {pin!r} of {master!r} has {w} "
                                    f"bits, the connection {len(b)}", k)
                    # constant bits: a fresh net inside, connected to nothing outside
                    nb = []
                    for x in b:
                        if x < 0:
                            x = len(self.net_names)
                            self.net_names.append(f"{full}/{pin}~const")
                        nb.append(x)
                    given[pin] = nb
                self.flatten(sub, full + "/", given, stack + (master,))
                continue
            if master not in macros:
                self.p.fail(f"instance {full!r}: {master!r} is neither a module of the file "
                            "nor a LEF macro", k)
            idx = len(self.inst_names)
            self.inst_names.append(full)
            self.inst_master.append(master)
            mpins = macros[master].pins
            for c in conns:
                if len(c) == 3:  # (pin, net, bit) text of a simple instance
                    pin, net, bit = c
                    if not bit and net and net[0] != "\\":
                        b = table.get(net)
                        if b is not None and len(b) == 1 and pin in mpins:  # the usual case
                            self.pin_net.append(b[0])
                            self.pin_inst.append(idx)
                            self.pin_name.append(pin)
                            continue
                    pin, atoms = self.atoms_of(c, k)
                else:
                    pin, atoms = c
                if not atoms:
                    continue
                b = self.bits(m, table, prefix, atoms, k)
                for name, x in zip(self.leaf_pins(master, pin, len(b), full, k), b):
                    if x >= 0:
                        self.pin_net.append(x)
                        self.pin_inst.append(idx)
                        self.pin_name.append(name)


def _top(mods: dict[str, _Module], top: str | None, parser) -> _Module:
    if top is not None:
        if top not in mods:
            raise DesignError(f"top module {top!r} is not in the file (modules: "
                              f"{', '.join(sorted(mods)[:8])})", file=parser.path, where="top")
        return mods[top]
    used = {inst[0] for m in mods.values() for inst in m.insts}
    tops = [m for m in mods.values() if m.name not in used]
    if len(tops) != 1:
        which = ", ".join(m.name for m in tops[:8]) if tops else "none (a cycle)"
        raise DesignError(f"cannot tell the top module: candidates {which}; give top=",
                          file=parser.path, where="top")
    return tops[0]


def read_verilog(path: str | Path, lib, top: str | None = None) -> Netlist:
    """Read a structural Verilog netlist (``.v`` or ``.v.gz``) and flatten it.

    Parameters
    ----------
    path : path
        The netlist, optionally compressed (the decompression cap of
        :func:`floorwidget.formats._io.read_text` applies).
    lib : LefLibrary
        The LEF library (:func:`floorwidget.formats.lefdef.read_lef`) holding every master.
    top : str, optional
        The top module; default the one module no other instantiates.

    Returns
    -------
    Netlist
        Leaf instances and I/O terminals, nets merged through assigns; nets of fewer than two
        connections are kept (:class:`Design` drops them).

    Raises
    ------
    DesignError
        ``file:line: message`` for a syntax error, an unknown master, pin or net, a width
        mismatch, an unsupported construct; ``file: message`` for an ambiguous top module.

    Examples
    --------
    >>> lib = read_lef(["tech.lef", "cells.lef"])          # doctest: +SKIP
    >>> nl = read_verilog("blk.v.gz", lib)                   # doctest: +SKIP
    """
    path = str(path)
    parser = _Parser(read_text(path), path)
    mods = parser.modules()
    tm = _top(mods, top, parser)
    missing = [p for p in tm.ports if p not in tm.dirs]
    if missing:
        parser.fail(f"module {tm.name!r}: port {missing[0]!r} has no direction", tm.tok)
    fl = _Flat(parser, mods, lib)
    table = fl.signals(tm, "", {})
    fl.flatten(tm, "", table, (tm.name,))
    # terminals: one per port bit, connected to that bit
    t_names, t_dirs, t_net = [], [], []
    for p in tm.ports:
        bits = table[p]
        rng = tm.ranges.get(p)
        if rng is None:
            t_names.append(p)
        else:
            a, b = rng
            t_names.extend(f"{p}[{i}]" for i in (range(a, b - 1, -1) if a >= b
                                                   else range(a, b + 1)))
        t_dirs.extend([tm.dirs[p]] * len(bits))
        t_net.extend(bits)
    ni = len(fl.inst_names)
    nets = len(fl.net_names)
    pin_net = np.array(fl.pin_net + t_net, np.int64)
    pin_block = np.concatenate([np.array(fl.pin_inst, np.int64),
                                ni + np.arange(len(t_net), dtype=np.int64)])
    pin_name = fl.pin_name + [""] * len(t_net)
    # merge nets joined by assigns: connected components (scipy.sparse.csgraph)
    label = np.arange(nets)
    if fl.pairs:
        from scipy.sparse import coo_matrix
        from scipy.sparse.csgraph import connected_components
        pr = np.array(fl.pairs, np.int64)
        g = coo_matrix((np.ones(len(pr)), (pr[:, 0], pr[:, 1])), shape=(nets, nets))
        _, label = connected_components(g, directed=False)
        # each merged net is named after its smallest id: a top-level port bit if it has one
        # (the top module's ports are numbered first), else its first declared bit
        first = np.full(label.max() + 1, nets, np.int64)
        np.minimum.at(first, label, np.arange(nets))
        label = first[label]
    order = np.argsort(label[pin_net], kind="stable")
    lab = label[pin_net][order]
    keys, starts = np.unique(lab, return_index=True)
    net_start = np.append(starts, len(lab)).astype(np.int64)
    pin_name = [pin_name[j] for j in order.tolist()]
    net_names = [fl.net_names[j] for j in keys.tolist()]
    # masters from the LEF, gathered per distinct master
    mnames = list(dict.fromkeys(fl.inst_master))
    mindex = {m: k for k, m in enumerate(mnames)}
    mid = np.fromiter(map(mindex.__getitem__, fl.inst_master), np.int64, ni)
    ms = [lib.macros[m] for m in mnames]
    nt = len(t_names)

    def per_block(values, fill, dtype):
        return np.concatenate([np.array(values, dtype)[mid].reshape(ni), np.full(nt, fill, dtype)])

    kind = per_block([m.kind for m in ms], TERMINAL, np.int8)
    width = per_block([m.width for m in ms], 0.0, np.float64)
    height = per_block([m.height for m in ms], 0.0, np.float64)
    allowed = per_block([m.allowed for m in ms], 1, np.uint8)
    # pin offsets: (master, pin name) looked up in a sorted table of every master's pins
    pid_of: dict[str, int] = {}
    rows = [(k, pid_of.setdefault(p, len(pid_of)), dx, dy)
            for k, m in enumerate(ms) for p, (dx, dy) in m.pins.items()]
    npi = len(fl.pin_name)
    pdx = np.zeros(len(pin_block))
    pdy = np.zeros(len(pin_block))
    if npi:
        P = len(pid_of)
        tab = np.array([(k * P + q, dx, dy) for k, q, dx, dy in rows], np.float64)
        tab = tab[np.argsort(tab[:, 0])]
        key = mid[pin_block[:npi]] * P + np.fromiter(map(pid_of.__getitem__, fl.pin_name),
                                                     np.int64, npi)
        hit = np.searchsorted(tab[:, 0], key)  # every pin was checked against its master
        pdx[:npi], pdy[:npi] = tab[hit, 1], tab[hit, 2]
        bad = np.flatnonzero(np.isnan(pdx[:npi]) | np.isnan(pdy[:npi]))
        if len(bad):
            j = int(bad[0])
            b = int(pin_block[j])
            raise DesignError(f"instance {fl.inst_names[b]!r}: pin {fl.pin_name[j]!r} of LEF "
                              f"macro {fl.inst_master[b]!r} has no shape", file=path,
                              where=f"instance {fl.inst_names[b]!r}")
    pin_block, pdx, pdy = pin_block[order], pdx[order], pdy[order]
    return Netlist(
        name=tm.name, names=fl.inst_names + t_names, masters=fl.inst_master + [""] * nt,
        kind=kind, width=width, height=height, orient_allowed=allowed, directions=t_dirs,
        net_names=net_names, net_start=net_start, pin_block=pin_block, pin_dx=pdx, pin_dy=pdy,
        pin_names=pin_name, source=path)

