"""DEF write time and the memory the write-back source costs, on the largest shared design.

Target: writing ariane136 (145,776 components, ``../shared/realdata``) back to DEF costs no
more than 1.2x the from-scratch writer.  "from scratch" is the writer for designs without a
DEF source (every statement built from the arrays, which loses what the design does not model);
"write-back" is the source with only the changed placements patched in.  Two floorplans: the
one read (``convert``) and one with every movable component moved by a site and flipped (as
after ``place``).  Medians of ``--repeat`` runs; the machine is shared, so read them as rough.

Usage::

    python benchmarks/bench_def_write.py             # ariane136
    python benchmarks/bench_def_write.py --quick     # aes_cipher_top (14,635 components)
"""

from __future__ import annotations

import argparse
import gzip
import resource
import statistics
import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
DATA = ROOT.parent / "shared" / "realdata"


def _lefs(folder: Path) -> list[Path]:
    lefs = sorted(folder.glob("*.lef"))
    tech = [p for p in lefs if "tech" in p.name]
    srams = [p for p in lefs if p.name.startswith("sram")]
    return tech + [p for p in lefs if p not in tech and p not in srams] + srams


def _median_time(fn, repeat: int) -> float:
    ts = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        ts.append(time.perf_counter() - t)
    return statistics.median(ts)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="aes_cipher_top instead of ariane136")
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    from floorwidget.design import MOVABLE, ORIENT_CODE
    from floorwidget.formats.lefdef import read_def, write_def

    name = "aes_cipher_top" if a.quick else "ariane136"
    folder = DATA / name
    if not folder.is_dir():
        print(f"skipped: {folder} not present")
        return
    tmp = Path(tempfile.mkdtemp(prefix="bench_defw_"))
    src = tmp / f"{name}.def"
    src.write_bytes(gzip.decompress((folder / f"{name}.def.gz").read_bytes()))
    rss0 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t = time.perf_counter()
        d = read_def(src, lef=_lefs(folder))
        read_s = time.perf_counter() - t
    rss1 = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    source = d.def_source
    moved = d.initial.copy()
    mv = np.flatnonzero(moved.status == MOVABLE)
    moved.x[mv] += float(d.row_site_width[0]) if len(d.row_x) else 1.0
    moved.orient[mv] = np.where(moved.orient[mv] == ORIENT_CODE["N"], ORIENT_CODE["FN"],
                                ORIENT_CODE["N"])
    out = tmp / "out.def"
    rows = []
    for label, fp in (("as read (convert)", d.initial), ("all movable moved", moved)):
        times = {}
        for how in ("from scratch", "write-back"):
            d.def_source = None if how == "from scratch" else source

            def run(fp=fp):
                with warnings.catch_warnings():
                    warnings.simplefilter("ignore")
                    write_def(d, fp, out, lef=False)

            times[how] = _median_time(run, a.repeat)
        d.def_source = source
        rows.append((label, times["from scratch"], times["write-back"]))
    mb = src.stat().st_size / 2**20
    print(f"{name}: {d.num_blocks:,} blocks, {len(mv):,} movable; DEF {mb:.1f} MB;"
          f" read {read_s:.1f} s, peak RSS {rss1:.0f} MB (before the read {rss0:.0f} MB)")
    print(f"write-back source kept with the design: {source.nbytes / 2**20:.1f} MB "
          f"(text {len(source.text) / 2**20:.1f} MB)\n")
    print("| floorplan | from scratch (s) | write-back (s) | ratio |")
    print("| --- | ---: | ---: | ---: |")
    for label, s0, s1 in rows:
        print(f"| {label} | {s0:.2f} | {s1:.2f} | {s1 / s0:.2f} |")
    for p in tmp.iterdir():
        p.unlink()
    tmp.rmdir()


if __name__ == "__main__":
    main()
