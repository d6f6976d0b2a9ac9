"""Placement of the public benchmark designs in ``../shared/realdata`` with default options.

``python benchmarks/bench_real.py [--only ibm01,aes] [--data DIR]``

Each design runs in its own subprocess (its peak memory is its own) with ``fw.place(design)``
and nothing else: default target density (raised to fit when the design is fuller), legal cells,
detailed placement.  Columns: cells, macros (movable ones in brackets), utilisation, wall and CPU
seconds, peak MB, HPWL after global placement, HPWL legal, legal (cells and macros), and the
yardstick: the DEF's own placement measured by ``floorwidget report`` for the contest designs,
or a figure remembered from the literature of the suite's day ("from memory": not exact, and
for similar but not always identical versions of the files).  ``ariane136 (movable SRAMs)`` is a
copy of the DEF with the SRAMs' ``FIXED`` turned into ``PLACED``, made in a temporary folder.

Targets (2 cores; defaults, no options), from the issues:

* ibm01-mixed legal, HPWL ≤ 2.9e6; ibm05 legal, HPWL ≤ 1.0e7;
* GSRC n200 and n300 at 10 % whitespace legal, n300 HPWL ≤ 5.4e5;
* aes_cipher_top legal, HPWL ≤ 1.10 × reference; ariane136 legal, ≤ 1.15 × reference and
  ≤ 60 s; ariane136 with movable SRAMs legal, ≤ 1.30 × reference;
* aes-dense (its I/O pins removed, the core shrunk to 82 % utilisation): ≤ 1.15 × its own
  placement squeezed into that core, overflow ≤ 0.10;
* every placement judged on congestion p99 (routing demand over supply, 1.0 = full) and
  overflow beside HPWL, against the design's own placement where there is one, and on the
  floorplan's shape (logic regions, narrow channels, macros with pins to a wall).

The figures are early-floorplanning estimates; sign-off belongs to the implementation flow.
"""

from __future__ import annotations

import argparse
import gzip
import json
import re
import resource
import subprocess
import sys
import tempfile
import time
from functools import partial
from pathlib import Path

import numpy as np
from scipy import ndimage

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT.parent / "shared" / "realdata"
sys.path.insert(0, str(ROOT))

# name: (folder, file pattern, yardstick HPWL or None, yardstick note)
DESIGNS = {
    "ibm01": ("ibm01-mixed", "*.aux", 2.5e6, "≈2.5e6 literature, from memory"),
    "ibm05": ("ibm05", "*.aux", 9.8e6, "≈9.8e6 literature, from memory"),
    "n200": ("gsrc-n200", "*.hardblocks", None, ""),
    "n300": ("gsrc-n300", "*.hardblocks", 5.0e5, "≈5.0e5 literature, from memory"),
    "aes": ("aes_cipher_top", "*.def.gz", "ref", "DEF's own placement"),
    "ariane": ("ariane136", "*.def.gz", "ref", "DEF's own placement"),
    "ariane-movable": ("ariane136", "*.def.gz", "ref", "DEF's own placement"),
    "aes-dense": ("aes_cipher_top", "*.def.gz", "ref",
                  "own placement squeezed into the smaller core (not legal; a yardstick)"),
}
DENSE_UTIL = 0.82  # "aes-dense": the I/O pins removed, the core shrunk to this utilisation


# judged beside HPWL, each against the design's own placement where there is one
FIGURES = ("congestion_p99", "density_overflow", "logic_regions", "largest_logic_region",
           "narrow_channels", "macros_facing_wall")


def largest_hole(design, fp) -> float:
    """The largest connected empty stretch of the core, as a share of its free area: report
    bins (4-neighbours) at least half free whose movable fill is under a tenth of their
    free area (scipy.ndimage.label)."""
    from floorwidget.metrics import density_map

    m = density_map(design, fp)
    free = np.maximum(m.free - m.fixed, 0.0)
    empty = (free >= 0.5 * m.grid.bin_area) & (m.movable < 0.1 * free)
    lab, n = ndimage.label(empty)
    if not n:
        return 0.0
    sizes = ndimage.sum(free, lab, index=np.arange(1, n + 1))
    return float(sizes.max() / max(free.sum(), 1e-300))


def _lefs(folder: Path) -> list[str]:
    lefs = sorted(str(p) for p in folder.glob("*.lef"))
    return [p for p in lefs if "tech" in Path(p).name] + \
        [p for p in lefs if "tech" not in Path(p).name]


def _movable_copy(def_gz: Path, tmp: Path) -> Path:
    """The DEF with every SRAM component ``FIXED`` turned into ``PLACED``."""
    out = tmp / def_gz.name
    text = gzip.decompress(def_gz.read_bytes()).decode()
    text = re.sub(r"(- \S+ sram\S*\s+\+ )FIXED", r"\1PLACED", text)
    out.write_bytes(gzip.compress(text.encode(), compresslevel=1))
    return out


def dense_pinless(d, util: float = DENSE_UTIL):
    """``d`` without its I/O terminals (their pins leave the nets; nets left with one pin go)
    on a square core shrunk about its lower-left corner until the cells fill ``util`` of it,
    the rows cut to it; the own placement squeezed by the same factor (a yardstick, not
    legal); every block movable (the input's fixed tap cells would land on each other).  The
    case of a dense block without pins to anchor the quadratic system."""
    import numpy as np

    from floorwidget.design import ORIENT_CODE, TERMINAL, Design

    keep = d.kind != TERMINAL
    new = np.full(d.num_blocks, -1, np.int64)
    new[keep] = np.arange(int(keep.sum()))
    pin_ok = keep[d.pin_block]
    deg = np.add.reduceat(pin_ok.astype(np.int64), d.net_start[:-1]) \
        if d.num_nets else np.zeros(0, np.int64)
    net_ok = deg >= 2
    pins = pin_ok & np.repeat(net_ok, np.diff(d.net_start))
    start = np.concatenate([[0], np.cumsum(deg[net_ok])])
    area = float(np.sum(d.width[keep] * d.height[keep]))
    c = d.core
    side = np.sqrt(area / util)
    rh, sw = float(d.row_height[0]), float(d.row_site_width[0])
    nrows = int(np.ceil(side / rh))
    nsites = int(np.ceil(side / sw))
    rows = {"x": np.full(nrows, c[0]), "y": c[1] + rh * np.arange(nrows),
            "height": np.full(nrows, rh), "site_width": np.full(nrows, sw),
            "num_sites": np.full(nrows, nsites),
            "orient": np.where(np.arange(nrows) % 2, ORIENT_CODE["FS"], ORIENT_CODE["N"])}
    f = side / max(c[2] - c[0], c[3] - c[1])
    ini = d.initial
    die = (c[0] - 1.0, c[1] - 1.0, c[0] + nsites * sw + 1.0, c[1] + nrows * rh + 1.0)
    names = [d.names[i] for i in np.flatnonzero(keep)]
    return Design(f"{d.name}-dense", die, names, d.kind[keep], d.width[keep], d.height[keep],
                  start, new[d.pin_block[pins]], d.pin_dx[pins], d.pin_dy[pins],
                  net_weight=d.net_weight[net_ok], rows=rows,
                  x=c[0] + (ini.x[keep] - c[0]) * f, y=c[1] + (ini.y[keep] - c[1]) * f,
                  status=np.zeros(int(keep.sum()), np.int8), validate=True)  # all to place


def load_design(name: str, data: Path):
    """The benchmark design ``name`` (a key of :data:`DESIGNS`) read from ``data``."""
    import floorwidget as fw

    folder, pattern, _, _ = DESIGNS[name]
    path = next((data / folder).glob(pattern))
    lef = _lefs(data / folder) if path.name.endswith((".def", ".def.gz")) else None
    with tempfile.TemporaryDirectory() as tmp:
        if name == "ariane-movable":
            path = _movable_copy(path, Path(tmp))
        d = fw.load(path, lef=lef)
    return dense_pinless(d) if name == "aes-dense" else d


def _child(name: str, data: Path) -> dict:

    import floorwidget as fw
    from floorwidget.design import CELL, MACRO, MOVABLE
    from floorwidget.placer.flow import utilisation

    ref = DESIGNS[name][2]
    d = load_design(name, data)
    out: dict = {"name": name}
    own = fw.evaluate(d) if ref == "ref" else None
    out["ref"] = own["hpwl"] if own else ref
    out["own"] = {k: own[k] for k in FIGURES} if own else None
    if own:
        out["own"]["hole"] = largest_hole(d, d.initial)
    st = d.initial.status
    out["cells"] = int((d.kind == CELL).sum())
    out["macros"] = int((d.kind == MACRO).sum())
    out["movable_macros"] = int(((d.kind == MACRO) & (st == MOVABLE)).sum())
    out["util"] = utilisation(d, d.initial)
    t = time.perf_counter()
    c = time.process_time()
    fp = fw.place(d)
    out["wall"] = time.perf_counter() - t
    out["cpu"] = time.process_time() - c
    rep = fw.evaluate(d, fp)
    out["hpwl_global"] = fp.info.get("hpwl_global", rep["hpwl"])
    out["hpwl"] = rep["hpwl"]
    out["legal"] = rep["legal"]
    out["target"] = rep["target_density"]
    out["stages"] = {k: round(v, 1) for k, v in fp.info["stage_seconds"].items()}
    out["figures"] = {k: rep[k] for k in FIGURES}
    out["figures"]["hole"] = largest_hole(d, fp)
    out["layout"] = fp.info.get("macro_layout", "")
    out["peak_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return out


def _beside(f: dict, own: dict, k: str, fmt: str = "{:.3g}", ratio: bool = False) -> str:
    """Our figure ``k``, with the design's own in brackets (as a ratio with ``ratio``)."""
    v = fmt.format(f[k])
    if k not in own:
        return v
    if ratio and own[k]:
        return f"{v} ({f[k] / own[k]:.2f}×)"
    return f"{v} ({fmt.format(own[k])})"


def main(argv: list[str]) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--only", default=",".join(DESIGNS), help="comma-separated design names")
    ap.add_argument("--data", default=str(DATA), help="folder of the benchmark designs")
    ap.add_argument("--quick", action="store_true", help="the small designs only")
    ap.add_argument("--child", help=argparse.SUPPRESS)
    a = ap.parse_args(argv)
    data = Path(a.data)
    if a.child:
        print(json.dumps(_child(a.child, data)))
        return 0
    if not data.is_dir():
        print(f"no benchmark designs at {data}; nothing to measure")
        return 0
    names = [n for n in a.only.split(",") if n]
    if a.quick:
        names = [n for n in names if n in ("ibm01", "aes", "n200")]
    print("| design | cells | macros (movable) | layout | util | target | wall s | CPU s "
          "| peak MB | HPWL global | HPWL legal | legal | yardstick | HPWL ÷ yardstick "
          "| congestion p99 (÷ own) | overflow (own) | logic regions (own) "
          "| largest hole % (own) | narrow channels | pins to a wall (own) | stages s |")
    print("|---|---:|---:|---|---:|---:|---:|---:|---:|---:|---:|---|---:|---:|---:|---:|---:"
          "|---:|---:|---:|---|")
    status = 0
    for name in names:
        if name not in DESIGNS or not (data / DESIGNS[name][0]).is_dir():
            print(f"| {name} | (no data) |")
            continue
        p = subprocess.run([sys.executable, __file__, "--child", name, "--data", str(data)],
                           capture_output=True, text=True)
        if p.returncode != 0:
            print(f"| {name} | error: {(p.stderr.strip().splitlines() or ['?'])[-1]} |")
            status = 1
            continue
        r = json.loads(p.stdout.strip().splitlines()[-1])
        ref = r["ref"]
        note = DESIGNS[name][3]
        ratio = f"{r['hpwl'] / ref:.3f}" if ref else "—"
        yard = f"{ref:.4g} ({note})" if ref else "—"
        f, own = r["figures"], r["own"] or {}
        beside = partial(_beside, f, own)
        def pct(fig):
            return {"hole": 100 * fig["hole"]} if "hole" in fig else {}
        print(f"| {name} | {r['cells']} | {r['macros']} ({r['movable_macros']}) | "
              f"{r['layout']} | {r['util']:.2f} | {r['target']:.2f} | {r['wall']:.1f} | "
              f"{r['cpu']:.1f} | {r['peak_mb']:.0f} | {r['hpwl_global']:.4g} | "
              f"{r['hpwl']:.4g} | {r['legal']} | {yard} | {ratio} | "
              f"{beside('congestion_p99', ratio=True)} | {beside('density_overflow')} | "
              f"{beside('logic_regions', '{}')} | "
              f"{_beside(pct(f), pct(own), 'hole', '{:.1f}')} | "
              f"{f['narrow_channels']} | "
              f"{beside('macros_facing_wall', '{}')} | {r['stages']} |", flush=True)
    return status


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
