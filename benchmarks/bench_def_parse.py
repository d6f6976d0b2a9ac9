"""DEF parse speed and memory: synthetic LEF/DEF pairs of 10^4 .. 10^6 components and nets.

Target: 10^6 components and 10^6 nets parse in <= 30 s on the project machine (2 cores).

Each size is generated on disk first (not timed), then parsed ``--repeat`` times, each in a fresh
subprocess so that the peak resident memory (``ru_maxrss``) belongs to that one parse; the
table shows the median time and the largest peak.

Usage::

    python benchmarks/bench_def_parse.py            # 10^4, 10^5, 10^6
    python benchmarks/bench_def_parse.py --quick    # 10^4, 10^5
"""

from __future__ import annotations

import argparse
import json
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

CELLS = [("bx_inv", 0.4, ["A", "Y"]), ("bx_nand2", 0.6, ["A", "B", "Y"]),
         ("bx_nor2", 0.6, ["A", "B", "Y"]), ("bx_aoi21", 0.8, ["A", "B", "C", "Y"]),
         ("bx_dff", 2.0, ["D", "CK", "Q"]), ("bx_buf", 0.6, ["A", "Y"])]
ROW_H, SITE_W, DBU = 2.0, 0.2, 1000


def write_lef(path: Path) -> None:
    out = ["VERSION 5.8 ;", "UNITS", f"  DATABASE MICRONS {DBU} ;", "END UNITS",
           "SITE bx_core", "  CLASS CORE ;", f"  SIZE {SITE_W} BY {ROW_H} ;", "END bx_core"]
    for name, w, pins in CELLS:
        out += [f"MACRO {name}", "  CLASS CORE ;", f"  SIZE {w} BY {ROW_H} ;",
                "  SYMMETRY X Y ;"]
        for k, p in enumerate(pins):
            x = (k + 0.5) * w / len(pins)
            out += [f"  PIN {p}", "    PORT", "      LAYER m1 ;",
                    f"        RECT {x - 0.05:.3f} 0.9 {x + 0.05:.3f} 1.1 ;", "    END",
                    f"  END {p}"]
        out.append(f"END {name}")
    out += ["MACRO bx_ram", "  CLASS BLOCK ;", "  SIZE 120 BY 80 ;", "  SYMMETRY X Y R90 ;"]
    for k in range(16):
        out += [f"  PIN D[{k}]", "    PORT", "      LAYER m2 ;",
                f"        RECT {5 + 7 * k} 0 {6 + 7 * k} 1 ;", "    END", f"  END D[{k}]"]
    out += ["END bx_ram", "END LIBRARY"]
    path.write_text("\n".join(out) + "\n")


def write_def(path: Path, n_comp: int, n_net: int, n_io: int = 1000, seed: int = 1) -> int:
    """A random netlist: degrees 2..6 (mean about 3.5), pins on random components."""
    rng = np.random.default_rng(seed)
    n_ram = min(100, n_comp // 1000)
    n_cell = n_comp - n_ram
    side = float(np.sqrt(n_cell * 1.0 * ROW_H / 0.6)) + 400
    nrows = int(side / ROW_H)
    nsites = int(side / SITE_W)
    master = rng.integers(0, len(CELLS), n_cell)
    xs = (rng.integers(0, nsites - 20, n_comp) * SITE_W * DBU).astype(np.int64)
    ys = (rng.integers(0, nrows - 50, n_comp) * ROW_H * DBU).astype(np.int64)
    orients = np.array(["N", "FS"])[rng.integers(0, 2, n_comp)]
    with open(path, "w") as f:
        f.write(f"VERSION 5.8 ;\nDESIGN bench_{n_comp} ;\nUNITS DISTANCE MICRONS {DBU} ;\n")
        f.write(f"DIEAREA ( 0 0 ) ( {int(side * DBU)} {int(side * DBU)} ) ;\n")
        for r in range(nrows):
            f.write(f"ROW row{r} bx_core 0 {int(r * ROW_H * DBU)} {'N' if r % 2 == 0 else 'FS'}"
                    f" DO {nsites} BY 1 STEP {int(SITE_W * DBU)} 0 ;\n")
        f.write(f"COMPONENTS {n_comp} ;\n")
        names = [c[0] for c in CELLS]
        f.writelines(f"- c{i} {names[master[i]]} + PLACED ( {xs[i]} {ys[i]} ) {orients[i]} ;\n"
                     for i in range(n_cell))
        f.writelines(f"- ram{i} bx_ram + FIXED ( {xs[n_cell + i]} {ys[n_cell + i]} ) N ;\n"
                     for i in range(n_ram))
        f.write("END COMPONENTS\n")
        f.write(f"PINS {n_io} ;\n")
        f.writelines(f"- io{k} + NET n{k} + DIRECTION INPUT + LAYER m2 ( -50 0 ) ( 50 100 ) "
                     f"+ FIXED ( {int(k * side * DBU / n_io)} 0 ) N ;\n" for k in range(n_io))
        f.write("END PINS\n")
        deg = rng.integers(2, 6, n_net)  # 2..5, plus an occasional I/O pin
        pins_total = 0
        f.write(f"NETS {n_net} ;\n")
        comp = rng.integers(0, n_cell, int(deg.sum()))
        pick = rng.random(int(deg.sum()))
        pos = 0
        lines = []
        for k in range(n_net):
            parts = []
            for c in comp[pos:pos + deg[k]]:
                pins = CELLS[master[c]][2]
                parts.append(f"( c{c} {pins[int(pick[pos] * len(pins))]} )")
                pos += 1
            if k < n_io:
                parts.append(f"( PIN io{k} )")
            lines.append(f"- n{k} {' '.join(parts)} + USE SIGNAL ;\n")
            pins_total += len(parts)
            if len(lines) >= 100000:
                f.writelines(lines)
                lines = []
        f.writelines(lines)
        f.write("END NETS\nEND DESIGN\n")
    return pins_total


def child(def_path: str, lef_path: str) -> None:
    from floorwidget.formats.lefdef import read_def

    t, c = time.perf_counter(), time.process_time()
    d = read_def(def_path, lef=[lef_path])
    sec, cpu = time.perf_counter() - t, time.process_time() - c
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps({"seconds": sec, "cpu": cpu, "peak_mb": peak, "blocks": d.num_blocks,
                      "nets": d.num_nets, "pins": d.num_pins}))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="10^4 and 10^5 only")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--child", nargs=2, help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a.child:
        return child(*a.child)
    sizes = [10**4, 10**5] if a.quick else [10**4, 10**5, 10**6]
    tmp = Path(tempfile.mkdtemp(prefix="bench_def_"))
    lef = tmp / "bench.lef"
    write_lef(lef)
    rows = []
    for n in sizes:
        dp = tmp / f"bench_{n}.def"
        t = time.perf_counter()
        pins = write_def(dp, n, n)
        gen = time.perf_counter() - t
        runs = []
        for _ in range(a.repeat):
            out = subprocess.run([sys.executable, __file__, "--child", str(dp), str(lef)],
                                 capture_output=True, text=True, check=True)
            runs.append(json.loads(out.stdout.strip().splitlines()[-1]))
        rows.append((n, runs[0]["nets"], runs[0]["pins"], pins,
                     statistics.median(r["seconds"] for r in runs),
                     statistics.median(r["cpu"] for r in runs),
                     max(r["peak_mb"] for r in runs), os.path.getsize(dp) / 2**20, gen))
        dp.unlink()
    print(f"{'components':>10} {'nets':>9} {'pins':>9} {'MB on disk':>10} {'parse s':>8} "
          f"{'cpu s':>7} {'peak MB':>8}   (median of {a.repeat}; generation not timed)")
    for n, nets, pins, _, sec, cpu, peak, mb, _gen in rows:
        print(f"{n:>10} {nets:>9} {pins:>9} {mb:>10.1f} {sec:>8.2f} {cpu:>7.2f} {peak:>8.0f}")
    print(f"load average while measuring: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    lef.unlink()
    tmp.rmdir()


if __name__ == "__main__":
    main()
