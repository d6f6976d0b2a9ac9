"""Make the demo netlist: ``heron_ctrl``, an invented control block of our imaginary "Heron"
chip, as a gate-level Verilog netlist (``heron_ctrl.v.gz``) and its library (``heron_lib.lef``),
for starting a floorplan from a netlist (``notebooks/06-from-netlist.ipynb``).

6,000 standard cells wired by Rent's rule (:func:`floorwidget.synth.rent_design`), six SRAM
macros, I/O ports; a made-up library of six routing layers (alternating horizontal and
vertical) and one site. Every name and number here is made up for the demo.

Run ``python demo_data/generate_netlist.py`` to rewrite both files (deterministic).
"""

from __future__ import annotations

import gzip
import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from floorwidget.design import MACRO, TERMINAL  # noqa: E402
from floorwidget.formats.lefdef.lef_writer import _abstracts  # noqa: E402
from floorwidget.synth import rent_design  # noqa: E402

HERE = Path(__file__).resolve().parent
# layer, direction, pitch (µm), width (µm)
LAYERS = [("hm1", "HORIZONTAL", 0.1, 0.05), ("hm2", "VERTICAL", 0.1, 0.05),
          ("hm3", "HORIZONTAL", 0.1, 0.05), ("hm4", "VERTICAL", 0.2, 0.1),
          ("hm5", "HORIZONTAL", 0.2, 0.1), ("hm6", "VERTICAL", 0.4, 0.2)]


def build():
    d = rent_design(6000, num_macros=6, macro_area=0.25, utilisation=0.6, seed=11,
                    num_terminals=120, name="heron_ctrl")
    # library cells have their pins in a row along the middle: the j-th of a block's n pins
    # at (j + 1/2) / n of its width, so a few masters serve all cells
    b = d.pin_block
    order = np.argsort(b, kind="stable")
    n = np.bincount(b, minlength=d.num_blocks)
    first = np.concatenate([[0], np.cumsum(n)[:-1]])
    j = np.empty(len(b), np.int64)
    j[order] = np.arange(len(b)) - first[b[order]]
    cell = d.kind[b] != MACRO
    w = d.width[b]
    d.pin_dx[cell] = (-w / 2 + (j + 0.5) * w / np.maximum(n[b], 1))[cell]
    d.pin_dy[cell] = 0.0
    return d


def _lef(d, ab) -> str:
    site_w = float(d.row_site_width[0])
    row_h = float(np.median(d.height[d.kind == 2]))
    out = ["VERSION 5.8 ;", 'BUSBITCHARS "[]" ;', 'DIVIDERCHAR "/" ;', "",
           "UNITS", "  DATABASE MICRONS 1000 ;", "END UNITS", ""]
    for nm, dr, pitch, width in LAYERS:
        out += [f"LAYER {nm}", "  TYPE ROUTING ;", f"  DIRECTION {dr} ;", f"  PITCH {pitch} ;",
                f"  WIDTH {width} ;", f"END {nm}", ""]
    out += ["SITE heron_core", "  CLASS CORE ;", "  SYMMETRY Y ;",
            f"  SIZE {site_w:g} BY {row_h:g} ;", "END heron_core", ""]
    for k, nm in enumerate(ab.names):
        w, h = ab.width[k], ab.height[k]
        macro = ab.kind[k] == MACRO
        out += [f"MACRO {nm}", f"  CLASS {'BLOCK' if macro else 'CORE'} ;", "  ORIGIN 0 0 ;",
                f"  SIZE {w:g} BY {h:g} ;", "  SYMMETRY X Y ;" if macro else "  SYMMETRY Y ;"]
        if not macro:
            out.append("  SITE heron_core ;")
        layer = "hm4" if macro else "hm1"
        for p, (dx, dy) in ab.master_pins[k].items():
            cx, cy = w / 2 + dx, h / 2 + dy
            out += [f"  PIN {p}", "    DIRECTION INOUT ;", "    USE SIGNAL ;", "    PORT",
                    f"      LAYER {layer} ;",
                    f"        RECT {cx - 0.02:.3f} {cy - 0.02:.3f} {cx + 0.02:.3f} {cy + 0.02:.3f} ;",
                    "    END", f"  END {p}"]
        out += [f"END {nm}", ""]
    out.append("END LIBRARY")
    return "\n".join(out) + "\n"


def _verilog(d, ab) -> str:
    names = [f"ctl_{'sram' if k == MACRO else 'u'}{i}" for i, k in enumerate(d.kind)]
    term = d.kind == TERMINAL
    ports = [f"io_{i}" for i in range(int(term.sum()))]
    port_of = dict(zip(np.flatnonzero(term).tolist(), ports))
    nets = [f"n{e}" for e in range(d.num_nets)]
    alias = []
    for e in range(d.num_nets):  # a net that reaches a port takes the port's name
        blocks = d.pin_block[d.net_start[e]:d.net_start[e + 1]]
        ps = [port_of[b] for b in blocks.tolist() if b in port_of]
        if ps:
            nets[e] = ps[0]
            alias += [f"  assign {p} = {ps[0]};" for p in ps[1:]]
    out = ["// heron_ctrl: an invented control block of the imaginary Heron chip (demo data).",
           f"module heron_ctrl ({', '.join(ports)});"]
    out += [f"  inout {p};" for p in ports]
    out += [f"  wire {n};" for n in nets if not n.startswith("io_")]
    conn: list[list[str]] = [[] for _ in range(d.num_blocks)]
    for e in range(d.num_nets):
        for k in range(d.net_start[e], d.net_start[e + 1]):
            b = int(d.pin_block[k])
            if not term[b]:
                conn[b].append(f".{ab.pin_name[k]}({nets[e]})")
    for b in np.flatnonzero(~term).tolist():
        out.append(f"  {ab.names[ab.block_master[b]]} {names[b]} ({', '.join(conn[b])});")
    out += alias
    out.append("endmodule")
    return "\n".join(out) + "\n"


def main() -> None:
    d = build()
    ab = _abstracts(d)
    (HERE / "heron_lib.lef").write_text(_lef(d, ab))
    with gzip.GzipFile(HERE / "heron_ctrl.v.gz", "wb", mtime=0) as f:
        f.write(_verilog(d, ab).encode())


if __name__ == "__main__":
    main()
