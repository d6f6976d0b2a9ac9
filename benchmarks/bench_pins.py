"""I/O pin assignment on the public contest designs: the design's own pins against ours.

``python benchmarks/bench_pins.py [--quick] [--repeat N]``

Every cell and macro stays where the design's DEF has it, on the DEF's own die; only the
I/O pins on a net that are not ``FIXED`` move, each on its own layer (the DEF's ``LAYER``) at
that layer's pitch, default corner keep-out (1 % of the shorter die side).  Columns: pins
assigned, total HPWL with the design's own pins and with ours (µm, the report's ``hpwl``),
their ratio, and the seconds of ``assign_pins`` (median of ``--repeat`` runs, default 3;
reading the design not included).  ``--quick``: aes_cipher_top only.

Target (issue 21): on ariane136 with its own die and every cell and macro held, lower total
HPWL than the design's own pins.  The figures are early-floorplanning estimates; sign-off
belongs to the implementation flow.
"""

from __future__ import annotations

import argparse
import gzip
import shutil
import statistics
import sys
import tempfile
import time
import warnings
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT.parent / "shared" / "realdata"
sys.path.insert(0, str(ROOT))

DESIGNS = {"ariane136": "ariane136", "aes_cipher_top": "aes_cipher_top"}


def _lefs(folder: Path) -> list[str]:
    """Technology LEF first, then the cells, then every SRAM (the README's order)."""
    lefs = sorted(folder.glob("*.lef"))
    tech = [p for p in lefs if "tech" in p.name]
    cells = [p for p in lefs if p not in tech and not p.name.startswith("sram")]
    return [str(p) for p in tech + cells + [p for p in lefs if p.name.startswith("sram")]]


def run(name: str, repeat: int) -> dict:
    import floorwidget as fw
    from floorwidget.floorplan.pins import assign_pins
    from floorwidget.metrics import hpwl

    folder = DATA / DESIGNS[name]
    src = next(folder.glob("*.def.gz"))
    with tempfile.TemporaryDirectory() as tmp:
        plain = Path(tmp) / src.name[:-3]
        with gzip.open(src, "rb") as f, open(plain, "wb") as g:
            shutil.copyfileobj(f, g)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            design = fw.load(plain, lef=_lefs(folder))
    own = design.initial
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fp = assign_pins(design, own)
        times.append(time.perf_counter() - t0)
    h0, h1 = hpwl(design, own), hpwl(design, fp)
    return {"design": name, "pins": fp.info["pins"]["assigned"], "own": h0, "ours": h1,
            "ratio": h1 / h0, "seconds": statistics.median(times)}


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args(argv)
    names = ["aes_cipher_top"] if args.quick else list(DESIGNS)
    print("| design | pins assigned | HPWL own pins (µm) | HPWL assigned (µm) | ratio | "
          "seconds (median) |")
    print("|---|---:|---:|---:|---:|---:|")
    for name in names:
        if not (DATA / DESIGNS[name]).is_dir():
            print(f"| {name} | (data not present) | | | | |")
            continue
        r = run(name, args.repeat)
        print(f"| {r['design']} | {r['pins']} | {r['own']:,.0f} | {r['ours']:,.0f} | "
              f"{r['ratio']:.4f} | {r['seconds']:.2f} |", flush=True)
    print("(early-floorplanning estimates; sign-off belongs to the implementation flow)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
