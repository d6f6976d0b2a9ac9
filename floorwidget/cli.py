"""The ``floorwidget`` command line: report, place, convert and render a design.

::

    floorwidget report  FILE [--lef L ...] [--json]
    floorwidget place   FILE [--lef L ...] -o OUT [--target-density D] [--seed S] [--json]
                        [--macro-layout auto|periphery|free] [--channel UM] [--pins-only]
                        [--power-grid GRID.json]
    floorwidget place   X.v --lef L ... [--top NAME] [--utilization U] [--aspect A]
                        [--margin UM] [--die X1 Y1 X2 Y2] -o OUT   (a netlist: die, rows first)
    floorwidget convert IN OUT [--lef L ...]
    floorwidget render  FILE -o OUT.png|OUT.svg [--lef L ...] [--heat density|congestion]
                        [--hierarchy DEPTH]

``--lef`` takes one or more files and may repeat (``--lef tech.lef cells.lef --lef ram.lef``);
put it after FILE.  Inputs may be compressed (``x.def.gz``, ``x.aux`` naming ``.nodes.gz`` ...);
an OUT ending in ``.gz`` or ``.bz2`` is written compressed.

Exit status 0 on success, 2 on bad input or bad options (one line on stderr naming the file and
line, or the option; never a traceback); an output (or set of outputs, such as a Bookshelf set
or a DEF with its LEF) is written completely or not at all.  ``--json`` prints strict JSON:
a value that is not a finite number (which a degenerate design can give) is printed as
``null``.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import time

from .design import DesignError
from .formats import load, save
from .formats._io import format_suffix
from .kernels import fmt

CAUTION = ("early-floorplanning estimates; timing, power and physical sign-off belong to the "
           "full implementation flow")

_LABELS = [
    ("hpwl", "HPWL (µm)"),
    ("hpwl_weighted", "weighted HPWL (µm)"),
    ("density_overflow", "density overflow"),
    ("peak_density", "peak bin density"),
    ("congestion_peak", "congestion, peak (routing demand / supply, 1.0 = full)"),
    ("congestion_p99", "congestion, p99 (routing demand / supply, 1.0 = full)"),
    ("rudy_peak", "RUDY demand, peak (µm of wire per µm²)"),
    ("rudy_p99", "RUDY demand, p99 (µm of wire per µm²)"),
    ("macro_overlaps", "overlapping macro pairs"),
    ("macro_overlap_area", "macro overlap area (µm²)"),
    ("out_of_die", "blocks outside the die"),
    ("off_grid", "macros off the grid"),
    ("legal", "legal"),
    ("num_blocks", "blocks"),
    ("num_nets", "nets"),
    ("target_density", "target density used"),
    ("cell_overlaps", "overlapping cell pairs"),
    ("cells_off_row", "cells off their rows"),
    ("cells_off_site", "cells off their sites"),
    ("pinned_illegal", "pinned macros breaking legality"),
    ("narrow_channels", "narrow channels (macro pairs)"),
    ("macros_facing_wall", "macros with pins to a wall"),
    ("logic_regions", "logic regions"),
    ("largest_logic_region", "largest logic region (share)"),
    ("straps_blocked", "macros clipping a power strap"),
    ("utilization", "utilisation (cell and macro area / core area)"),
]


class _Bad(Exception):
    """Bad command-line input (not a design problem)."""


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, exit 2, like every other bad input
        raise _Bad(f"{self.prog}: {message}")


_SEED_MAX = 2**32 - 1  # what numpy's seeding takes


def _number(lo: float, hi: float, lo_open: bool, what: str):
    """An argparse type: a finite float in ``[lo, hi]`` (``(lo, hi]`` when ``lo_open``)."""
    def parse(text: str) -> float:
        try:
            v = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
        if not (math.isfinite(v) and (v > lo if lo_open else v >= lo) and v <= hi):
            raise argparse.ArgumentTypeError(f"must be {what}, got {text!r}")
        return v
    return parse


_density = _number(0.0, 1.0, True, "a number in (0, 1]")
_channel = _number(0.0, 1e9, False, "a number of µm in [0, 1e9]")


def _whole(lo: int, hi: int):
    """An argparse type: a whole number in ``[lo, hi]``."""
    def parse(text: str) -> int:
        try:
            v = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"not a whole number: {text!r}") from None
        if not lo <= v <= hi:
            raise argparse.ArgumentTypeError(f"must be a whole number in [{lo}, {hi}], "
                                             f"got {text!r}")
        return v
    return parse


_seed = _whole(0, _SEED_MAX)
_depth = _whole(0, 64)


def _strict(v):
    """JSON-safe copy of a report: non-finite floats become None (printed as null)."""
    if isinstance(v, float):
        return v if math.isfinite(v) else None
    if isinstance(v, dict):
        return {k: _strict(x) for k, x in v.items()}
    if isinstance(v, (list, tuple)):
        return [_strict(x) for x in v]
    return v


def _parser() -> argparse.ArgumentParser:
    p = _Parser(prog="floorwidget", description="Macro floorplanning from the command line. "
                "Figures are " + CAUTION + ".")
    sub = p.add_subparsers(dest="command", required=True, parser_class=_Parser)

    def common(sp):
        sp.add_argument("--lef", nargs="+", action="extend", default=[], metavar="L",
                        help="LEF libraries for a .def or .v input, technology LEF first (one or "
                             "more; may repeat)")
        sp.add_argument("--whitespace", type=float, default=None, metavar="W",
                        help="GSRC .blocks/.hardblocks input: outline area = (1 + W) x block "
                             "area (default: the terminals' box, else 0.10)")
        sp.add_argument("--aspect", type=float, default=None, metavar="A",
                        help="GSRC input: outline height / width with --whitespace; Verilog "
                             "input: core height / width (default 1)")
        sp.add_argument("--top", default=None, metavar="NAME",
                        help="Verilog input: the top module (default: the one module no "
                             "other instantiates)")
        sp.add_argument("--utilization", type=_density, default=None, metavar="U",
                        help="Verilog input: cell and macro area / core area, 0 < U <= 1 "
                             "(default 0.7)")
        sp.add_argument("--margin", type=_channel, default=None, metavar="UM",
                        help="Verilog input: space between core and die, µm (default 20 row "
                             "heights)")
        sp.add_argument("--die", type=float, nargs=4, default=None,
                        metavar=("X1", "Y1", "X2", "Y2"),
                        help="Verilog input: the die, µm, instead of --utilization/--aspect")

    def json_option(sp):
        sp.add_argument("--json", action="store_true",
                        help="print the report as JSON (non-finite values as null)")

    r = sub.add_parser("report", help="print the figures of a design as placed in the file")
    r.add_argument("file")
    common(r)
    json_option(r)

    pl = sub.add_parser("place", help="place the design and write the result")
    pl.add_argument("file")
    common(pl)
    pl.add_argument("-o", "--output", required=True, metavar="OUT",
                    help="output file: .json, .pl, .def or .aux (.gz or .bz2 compresses)")
    pl.add_argument("--target-density", type=_density, default=0.8, metavar="D",
                    help="target bin utilisation, 0 < D <= 1 (default 0.8)")
    pl.add_argument("--seed", type=_seed, default=0, metavar="S",
                    help=f"random seed, 0 <= S <= {_SEED_MAX} (default 0)")
    pl.add_argument("--macro-layout", choices=("auto", "periphery", "free"), default="auto",
                    help="macros against the core boundary and each other (periphery), where "
                         "the wirelength puts them (free), or chosen per design (auto, default)")
    pl.add_argument("--channel", type=_channel, default=None, metavar="UM",
                    help="facing macros abut or stand at least UM µm apart (default: four row "
                         "heights)")
    pl.add_argument("--pins-only", action="store_true",
                    help="reassign only the I/O pins to slots on the die edges for least "
                         "wirelength; every other block stays where FILE has it")
    pl.add_argument("--power-grid", default=None, metavar="GRID.json",
                    help="lay this power grid (rings, straps, followpins: the keys of "
                         "floorwidget.floorplan.power.GridSpec) before placing; the placer "
                         "honours it and the output DEF carries it as SPECIALNETS")
    json_option(pl)

    c = sub.add_parser("convert", help="convert between .json, .aux/.pl and .def")
    c.add_argument("input")
    c.add_argument("output")
    common(c)

    rd = sub.add_parser("render", help="draw the floorplan to a PNG or SVG file")
    rd.add_argument("file")
    common(rd)
    rd.add_argument("-o", "--output", required=True, metavar="OUT")
    rd.add_argument("--heat", choices=("density", "congestion"), default=None)
    rd.add_argument("--hierarchy", type=_depth, default=None, metavar="DEPTH",
                    help="colour macros and the logic by hierarchy group (instance-name "
                         "prefix of up to DEPTH levels)")
    return p


def _print_report(rep: dict, as_json: bool, out=None) -> None:
    out = sys.stdout if out is None else out
    if as_json:
        json.dump(_strict(dict(rep)), out, indent=2, allow_nan=False)
        out.write("\n")
        return
    width = max(len(label) for _, label in _LABELS)
    for key, label in _LABELS:
        text = fmt.value(rep[key], digits=4, big=1e4)
        out.write(f"{label:<{width}}  {text}\n")
    out.write(f"({CAUTION})\n")


class _Progress:
    """A one-line progress bar on stderr, shown only once a run has taken over a second."""

    def __init__(self, stream=sys.stderr, delay: float = 1.0):
        self.stream, self.delay, self.t0, self.shown = stream, delay, time.perf_counter(), False

    def __call__(self, stage: str, fraction: float, info: dict | None = None) -> None:
        elapsed = time.perf_counter() - self.t0
        if elapsed < self.delay:
            return
        fraction = min(max(float(fraction), 0.0), 1.0)
        bar = "#" * int(round(fraction * 30))
        self.stream.write(f"\r{stage:<12} [{bar:<30}] {fraction:4.0%}  {elapsed:6.1f} s")
        self.stream.flush()
        self.shown = True

    def close(self) -> None:
        if self.shown:
            self.stream.write("\n")
            self.stream.flush()


def _load(path: str, args):
    if format_suffix(path) == ".v":
        from .floorplan.init import load_netlist

        if args.whitespace is not None:
            raise _Bad("floorwidget: --whitespace applies to GSRC inputs, not a Verilog netlist")
        return load_netlist(path, args.lef, top=args.top, utilization=args.utilization,
                            aspect=args.aspect, margin=args.margin, die=args.die)
    given = [o for o in ("top", "utilization", "margin", "die") if getattr(args, o) is not None]
    if given:
        raise _Bad(f"floorwidget: --{given[0]} applies to a Verilog netlist (.v) only")
    return load(path, lef=args.lef or None, whitespace=args.whitespace, aspect=args.aspect)


def _with_grid(design, path: str):
    """``design`` with the power grid of the JSON file ``path``; errors name the file."""
    from .floorplan.power import build_grid, load_spec

    spec = load_spec(path)
    try:
        return design.derive(power=build_grid(design, spec))
    except DesignError as e:
        raise DesignError(e.message, file=path) from None


def _run(args) -> int:
    if args.command == "report":
        from .metrics import evaluate

        design = _load(args.file, args)
        _print_report(evaluate(design, design.initial), args.json)
    elif args.command == "place":
        from .metrics import evaluate
        from .placer import place

        design = _load(args.file, args)
        if args.power_grid is not None:
            design = _with_grid(design, args.power_grid)
        bar = _Progress()
        try:
            opts = dict(target_density=args.target_density, seed=args.seed, progress=bar,
                        macro_layout=args.macro_layout, channel=args.channel)
            if args.pins_only:
                from .floorplan.pins import assign_pins

                fp = assign_pins(design, design.initial)
            elif format_suffix(args.file) == ".v":  # a new floorplan: its pins follow the logic
                from .floorplan.pins import assign_pins_iterated

                fp = assign_pins_iterated(design, design.initial, rounds=1, **opts)
            else:
                fp = place(design, **opts)
        except DesignError as e:  # the input cannot be placed as asked: name the input file
            if e.file is not None:
                raise
            raise type(e)(e.message, file=args.file) from None
        finally:
            bar.close()
        save(design, fp, args.output)
        _print_report(evaluate(design, fp, target_density=args.target_density,
                               channel=args.channel), args.json)
    elif args.command == "convert":
        design = _load(args.input, args)
        save(design, design.initial, args.output)
    elif args.command == "render":
        from .render import render

        design = _load(args.file, args)
        render(design, design.initial, args.output, heat=args.heat, hierarchy=args.hierarchy)
    return 0


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``floorwidget`` console script; returns the exit status."""
    try:
        args = _parser().parse_args(argv)
        return _run(args)
    except (_Bad, DesignError, ValueError) as e:  # a library ValueError names a bad option
        msg = " ".join(str(e).split())  # exactly one line
        sys.stderr.write(f"floorwidget: error: {msg}\n")
        return 2
    except BrokenPipeError:  # e.g. piped into head: not an error of ours
        return 0
    except OSError as e:
        where = f"{e.filename}: " if e.filename else ""
        sys.stderr.write(f"floorwidget: error: {where}{e.strerror or e}\n")
        return 2
    except KeyboardInterrupt:
        sys.stderr.write("floorwidget: interrupted\n")
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
