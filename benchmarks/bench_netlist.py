"""From a gate-level netlist to a placed floorplan: ariane136 (``../shared/realdata``).

``python benchmarks/bench_netlist.py [--repeat N] [--readers-only] [--quick]``

Two tables.

1. **Readers** (CPU seconds, median of ``--repeat`` runs, default 3): our streaming reader
   (:func:`floorwidget.formats.verilog.read_verilog`: tokens, modules, flattening, LEF pins)
   against pyslang, a full SystemVerilog front end, when it is installed (it is not a
   dependency: ``pip install pyslang`` to measure it).  pyslang is timed on its parse alone
   and on the parse plus the walk of its syntax tree from Python that builds the same modules
   as ours (:class:`SlangModules`), which are then flattened and checked identical.  Its own
   elaboration is not used: it would need a module for every library cell.
2. **End to end**: LEF + Verilog read, initial floorplan (die, rows, tracks, pins), ``place``
   with default options, and the report, for the utilisation asked (default 0.7, aspect 1)
   and for the die of the design's own DEF; HPWL beside that of the DEF's own placement
   (read with our DEF reader).  Target (issue 21): legal, at most 2 min end to end.

The figures are early-floorplanning estimates; sign-off belongs to the implementation flow.
"""

from __future__ import annotations

import argparse
import re
import statistics
import sys
import time
import warnings
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT.parent / "shared" / "realdata" / "ariane136"
sys.path.insert(0, str(ROOT))

import floorwidget as fw  # noqa: E402
from floorwidget.design import DesignError  # noqa: E402
from floorwidget.floorplan.init import floorplan_netlist  # noqa: E402
from floorwidget.floorplan.pins import assign_pins_iterated  # noqa: E402
from floorwidget.formats._io import read_text  # noqa: E402
from floorwidget.formats.lefdef import read_lef  # noqa: E402
from floorwidget.formats.verilog import (  # noqa: E402
    _Flat,
    _ident,
    _Module,
    _Parser,
    _top,
    read_verilog,  # noqa: E402
)

_NAME = re.compile(r"[A-Za-z_][\w$]*")
_BIT = re.compile(r"([A-Za-z_][\w$]*)\s*\[\s*(\d+)\s*\]")

NETLIST = DATA / "ariane136.v.gz"
REF_DEF = DATA / "ariane136.def.gz"
# the technology LEF, the cell LEF, then the SRAM LEFs
LEFS = [str(DATA / "asap7_tech_1x_201209.lef"), str(DATA / "asap7sc7p5t_27_R_1x_201211.lef")] \
    + sorted(str(p) for p in DATA.glob("sram_*.lef"))


def _median(fn, repeat: int) -> tuple[float, object]:
    times, out = [], None
    for _ in range(repeat):
        t0 = time.process_time()
        out = fn()
        times.append(time.process_time() - t0)
    return statistics.median(times), out


class SlangModules:
    """The modules our streaming reader builds (``verilog._Parser.modules``), read from
    pyslang's syntax tree instead: the front end a pyslang-based reader would have; the
    flattening and LEF resolution would be the ones we have."""

    def __init__(self, text: str, path: str):
        import pyslang

        self.path = path
        self.S = pyslang.syntax
        self.tree = self.S.SyntaxTree.fromText(text, Path(path).name)
        self.sm = self.tree.sourceManager
        K = self.S.SyntaxKind
        self.kinds = (K.NamedPortConnection, (K.SimplePropertyExpr, K.SimpleSequenceExpr),
                      K.IdentifierName)
        errors = [d for d in self.tree.diagnostics if d.isError()]
        if errors:
            msg = pyslang.DiagnosticEngine(self.sm).formatMessage(errors[0])
            raise DesignError(msg, file=path, line=self.line(errors[0].location))

    def line(self, loc) -> int:
        return int(self.sm.getLineNumber(loc))

    def fail(self, msg: str, where=None):
        """Raise with the line of ``where`` (a line number or a pyslang source location)."""
        line = where if where is None or isinstance(where, int) else self.line(where)
        raise DesignError(msg, file=self.path, line=line)

    def expr(self, node, where) -> list:
        K = self.S.SyntaxKind
        while node.kind in self.kinds[1]:
            node = node.expr
        if node.kind == K.IdentifierName:
            return [("s", _ident(node.identifier.rawText), None, None)]
        text = str(node).strip()
        m = _BIT.fullmatch(text)
        if m:
            b = int(m.group(2))
            return [("s", m.group(1), b, b)]
        try:
            return _Parser(text, self.path).expr()
        except DesignError as e:
            self.fail(e.message, where)

    def range_(self, node, line: int) -> tuple[int, int] | None:
        text = str(node).strip() if node is not None else ""
        m = re.search(r"\[\s*(\d+)\s*:\s*(\d+)\s*\]", text)
        if m is None:
            if "[" in text:
                self.fail(f"unsupported range {text!r}", line)
            return None
        return int(m.group(1)), int(m.group(2))

    def modules(self) -> dict[str, _Module]:
        K = self.S.SyntaxKind
        root = self.tree.root
        decls = [root] if root.kind == K.ModuleDeclaration else list(root.members)
        mods: dict[str, _Module] = {}
        for md in decls:
            if md.kind != K.ModuleDeclaration:
                self.fail(f"{md.kind.name} is not structural netlist content",
                          self.line(md.sourceRange.start))
            h = md.header
            m = _Module(_ident(h.name.rawText), self.line(h.name.location))
            if m.name in mods:
                self.fail(f"module {m.name!r} defined twice", m.tok)
            if h.parameters is not None:
                self.fail(f"module {m.name!r}: parameters are not supported in a structural "
                          "netlist", m.tok)
            mods[m.name] = m
            ports = h.ports
            d, rng = None, None
            for p in (ports.ports if ports is not None else ()):
                if p.kind == K.ImplicitNonAnsiPort:
                    m.ports.append(_ident(str(p).strip()))
                elif p.kind == K.ImplicitAnsiPort:
                    line = self.line(p.sourceRange.start)
                    hd = p.header
                    if getattr(hd, "direction", None) is not None and hd.direction.rawText:
                        d = hd.direction.rawText
                        rng = self.range_(getattr(hd, "dataType", None), line)
                    nm = _ident(p.declarator.name.rawText)
                    m.ports.append(nm)
                    m.dirs[nm] = d
                    m.ranges[nm] = rng
                elif p.kind in (K.ExplicitNonAnsiPort, K.ExplicitAnsiPort):
                    self.fail(f"module {m.name!r}: explicit port expressions are not supported",
                              self.line(p.sourceRange.start))
            for it in md.members:
                self.member(m, it)
        if not mods:
            raise DesignError("no module in the file", file=self.path)
        return mods

    def member(self, m: _Module, it) -> None:
        K = self.S.SyntaxKind
        k = it.kind
        line = self.line(it.sourceRange.start)
        if k == K.HierarchyInstantiation:
            master = _ident(it.type.rawText)
            if it.parameters is not None:
                self.fail(f"instance of {master!r}: parameter overrides are not supported", line)
            named = self.kinds[0]
            for inst in it.instances:
                if inst.kind != K.HierarchicalInstance:
                    continue
                decl = inst.decl
                name = _ident(decl.name.rawText)
                loc = decl.name.location  # its line is worked out on an error only
                if len(decl.dimensions):
                    self.fail(f"instance {name!r}: instance arrays are not supported", loc)
                conns = []
                for c in inst.connections:
                    ck = c.kind
                    if ck == named:
                        e = c.expr
                        if e is None:
                            atoms = []
                        else:
                            t = str(e).strip()
                            atoms = ([("s", t, None, None)] if _NAME.fullmatch(t)
                                     else self.expr(e, loc))
                        conns.append((_ident(c.name.rawText), atoms))
                    elif ck in (K.OrderedPortConnection, K.WildcardPortConnection):
                        self.fail(f"instance {name!r}: only named connections .PIN(net) are "
                                  "supported", loc)
                m.insts.append((master, name, conns, loc))
        elif k == K.PortDeclaration:
            d = it.header.direction.rawText
            rng = self.range_(getattr(it.header, "dataType", None), line)
            for dc in it.declarators:
                if dc.kind != K.Declarator:
                    continue
                nm = _ident(dc.name.rawText)
                if nm not in m.ports:
                    self.fail(f"module {m.name!r}: {d} {nm!r} is not in the port list", line)
                m.dirs[nm] = d
                m.ranges[nm] = rng
        elif k == K.NetDeclaration:
            rng = self.range_(it.type, line)
            for dc in it.declarators:
                if dc.kind != K.Declarator:
                    continue
                nm = _ident(dc.name.rawText)
                if m.ranges.get(nm) is None:
                    m.ranges[nm] = rng
                if dc.initializer is not None:
                    m.assigns.append(([("s", nm, None, None)],
                                      self.expr(dc.initializer.expr, line), line))
        elif k == K.ContinuousAssign:
            for a in it.assignments:
                if a.kind == K.AssignmentExpression:
                    m.assigns.append((self.expr(a.left, line), self.expr(a.right, line), line))
        elif k in (K.ParameterDeclarationStatement, K.TimeUnitsDeclaration):
            return
        else:
            self.fail(f"module {m.name!r}: {k.name} is not structural netlist content (not "
                      "supported)", line)


def _flatten(parser, lib) -> _Flat:
    mods = parser.modules()
    tm = _top(mods, None, parser)
    fl = _Flat(parser, mods, lib)
    fl.flatten(tm, "", fl.signals(tm, "", {}), (tm.name,))
    return fl


def readers(repeat: int) -> None:
    lib = read_lef(LEFS)
    text = read_text(NETLIST)
    t_all, nl = _median(lambda: read_verilog(NETLIST, lib), repeat)
    t_mod, _ = _median(lambda: _Parser(text, str(NETLIST)).modules(), repeat)
    fl = _flatten(_Parser(text, str(NETLIST)), lib)
    rows = [("ours: text to modules", t_mod, "tokens, modules, instances, connections"),
            ("ours: the whole reader", t_all,
             f"{len(nl.names) - len(nl.terminals):,} instances, {len(nl.net_names):,} nets, "
             "flat, LEF pins")]
    try:
        import pyslang
    except ImportError:
        rows.append(("pyslang", float("nan"), "not installed (pip install pyslang)"))
    else:
        t_p, _ = _median(lambda: pyslang.syntax.SyntaxTree.fromText(text), repeat)
        t_m, _ = _median(lambda: SlangModules(text, str(NETLIST)).modules(), repeat)
        fs = _flatten(SlangModules(text, str(NETLIST)), lib)
        same = (fs.inst_names == fl.inst_names and fs.inst_master == fl.inst_master
                and fs.pin_name == fl.pin_name and fs.pin_net == fl.pin_net
                and fs.pairs == fl.pairs)
        rows.append(("pyslang: parse only", t_p, "syntax tree"))
        rows.append(("pyslang: text to modules", t_m,
                     "the same modules from its syntax tree; flattened, "
                     + ("identical to ours" if same else "DIFFERENT from ours")))
    print(f"Readers on {NETLIST.name} ({NETLIST.stat().st_size / 1e6:.1f} MB compressed), "
          f"CPU seconds (the machine is shared), median of {repeat}\n")
    print(f"| {'reader':<26} | {'CPU s':>6} | what it delivers |")
    print(f"|{'-' * 28}|{'-' * 8}|------------------|")
    for name, t, what in rows:
        print(f"| {name:<26} | {t:6.2f} | {what} |")
    print()


def end_to_end(reference: bool) -> None:
    ref_hpwl, ref_die = None, None
    if reference:
        ref = fw.load(str(REF_DEF), lef=LEFS)
        ref_hpwl = fw.evaluate(ref, ref.initial)["hpwl"]
        ref_die = tuple(float(v) for v in ref.die)
        print(f"reference: the DEF's own placement, HPWL {ref_hpwl:,.0f} µm, die "
              f"{ref_die[2] - ref_die[0]:g} x {ref_die[3] - ref_die[1]:g} µm, utilisation "
              f"{fw.evaluate(ref, ref.initial)['utilization']:.3f}\n")
    cases = [("utilisation 0.7, aspect 1", dict(utilization=0.7))]
    if ref_die is not None:
        cases.append(("the DEF's die", dict(die=ref_die, margin=5.004)))
    print("| case | read s | floorplan s | place s | total s | utilisation asked / got | "
          "HPWL µm | legal | HPWL / DEF's |")
    print("|---|---|---|---|---|---|---|---|---|")
    for label, opts in cases:
        t0 = time.perf_counter()
        lib = read_lef(LEFS)
        nl = read_verilog(NETLIST, lib)
        t1 = time.perf_counter()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # the single-pin nets of unused outputs
            design = floorplan_netlist(nl, lib, **opts)
        t2 = time.perf_counter()
        fp = assign_pins_iterated(design, design.initial, rounds=1)  # as `place X.v` does
        t3 = time.perf_counter()
        rep = fw.evaluate(design, fp)
        asked = opts.get("utilization")
        ratio = f"{rep['hpwl'] / ref_hpwl:.3f}" if ref_hpwl else "-"
        print(f"| {label} | {t1 - t0:.1f} | {t2 - t1:.2f} | {t3 - t2:.1f} | {t3 - t0:.1f} | "
              f"{'-' if asked is None else f'{asked:.3f}'} / {rep['utilization']:.4f} | "
              f"{rep['hpwl']:,.0f} | {'yes' if rep['legal'] else 'no'} | {ratio} |", flush=True)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--readers-only", action="store_true")
    ap.add_argument("--quick", action="store_true", help="one read each, no reference DEF")
    a = ap.parse_args(argv)
    if not NETLIST.is_file():
        print(f"skipped: {NETLIST} not found")
        return 0
    readers(1 if a.quick else a.repeat)
    if not a.readers_only:
        end_to_end(reference=not a.quick)
    return 0


if __name__ == "__main__":
    sys.exit(main())
