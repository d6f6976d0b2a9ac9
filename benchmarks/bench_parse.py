"""Bookshelf parse speed and memory: ``read_aux`` on synthetic designs of 10^5 and 10^6 nodes.

Files are generated on disk in a temporary directory (``rent_design`` + ``write_aux``, four pins
per cell and per net on average).  Each timing runs ``read_aux`` in a fresh subprocess which also
reports its peak resident memory (``ru_maxrss``, including the interpreter and numpy, about
40 MB).  Target (see the task): 10^6 nodes, ~10^6 nets, ~4·10^6 pins in at most 20 s.

Usage::

    python benchmarks/bench_parse.py            # 10^5 (median of 3) and 10^6 (median of 3)
    python benchmarks/bench_parse.py --quick    # 10^4 and 10^5, one run each
"""

from __future__ import annotations

import argparse
import json
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

CHILD = r"""
import json, resource, sys, time, warnings
warnings.simplefilter("ignore")
from floorwidget.formats.bookshelf import read_aux
t, c = time.perf_counter(), time.process_time()
d = read_aux(sys.argv[1])
dt, dc = time.perf_counter() - t, time.process_time() - c
rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
print(json.dumps({"seconds": dt, "cpu": dc, "peak_mb": rss, "nodes": d.num_blocks,
                  "nets": d.num_nets,
                  "pins": d.num_pins}))
"""


def _make(directory: Path, cells: int) -> tuple[Path, float, int]:
    from floorwidget.formats.bookshelf import write_aux
    from floorwidget.synth import rent_design

    t = time.perf_counter()
    d = rent_design(cells, avg_pins=4.0, avg_degree=4.0, num_macros=max(1, cells // 5000),
                    seed=1, name=f"bench{cells}", validate=False)
    aux = write_aux(d, None, directory)
    size = sum(p.stat().st_size for p in directory.glob(f"bench{cells}.*"))
    return aux, time.perf_counter() - t, size


def _run(aux: Path) -> dict:
    out = subprocess.run([sys.executable, "-c", CHILD, str(aux)], capture_output=True,
                         text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="10^4 and 10^5 nodes, one run each")
    ap.add_argument("--repeat", type=int, default=3, help="runs per size (median reported)")
    ap.add_argument("--sizes", type=int, nargs="*", help="cell counts instead of the defaults")
    args = ap.parse_args(argv)
    sizes = [(10**4, 1), (10**5, 1)] if args.quick else [(10**5, args.repeat),
                                                           (10**6, args.repeat)]
    if args.sizes:
        sizes = [(n, args.repeat) for n in args.sizes]
    rows = []
    with tempfile.TemporaryDirectory(prefix="bench_parse_") as tmp:
        for cells, repeat in sizes:
            d = Path(tmp) / str(cells)
            d.mkdir()
            aux, gen_s, size = _make(d, cells)
            runs = [_run(aux) for _ in range(repeat)]
            r = runs[0]
            rows.append((r["nodes"], r["nets"], r["pins"], size / 1e6,
                         statistics.median(x["seconds"] for x in runs),
                         statistics.median(x["cpu"] for x in runs),
                         max(x["peak_mb"] for x in runs), repeat, gen_s))
            for f in d.iterdir():
                f.unlink()
    print("Bookshelf read_aux (median of runs; peak = max RSS of the reading process)")
    print(f"{'nodes':>9} {'nets':>9} {'pins':>9} {'files MB':>9} {'seconds':>8} "
          f"{'cpu s':>6} {'peak MB':>8} {'runs':>5} {'gen s':>6}")
    for n, m, p, mb, s, c, pk, rep, g in rows:
        print(f"{n:>9} {m:>9} {p:>9} {mb:>9.1f} {s:>8.2f} {c:>6.2f} {pk:>8.0f} {rep:>5} "
              f"{g:>6.1f}")
    print("seconds = wall clock; cpu s = CPU time of the reading process (the machine is shared)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
