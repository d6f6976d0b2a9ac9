"""Placer benchmarks: full flow on Rent's-rule designs, quality on known-optimum instances, and
the latency of ``refine`` after one macro move on the demo design.

``python benchmarks/bench_placer.py [--quick] [--only rent,ko,refine] [--sizes 1000,10000]``

Every size runs in its own subprocess so that its peak memory (``ru_maxrss`` of that process,
design generation included) is its own.  Targets (2 cores, 24 GB):

* refine after one macro move on the demo design: median ≤ 100 ms;
* 10^5 cells, full flow ≤ 30 s; 10^6 cells ≤ 5 min and ≤ 8 GB peak;
* known optimum (Chang, Cong, Xie, ASP-DAC 2003, from memory): HPWL ÷ optimum ≤ 1.15 at 10^4
  and ≤ 1.25 at 10^5 cells after global placement at overflow ≤ 0.10 (target density 1.0:
  the instances fill the core).

Quote medians; the machine is noisy.  Rows also give the CPU time of the process, which is
about what the wall time would be on an idle machine (the placer is single-threaded).
"""

from __future__ import annotations

import argparse
import json
import math
import resource
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))


def _child(kind: str, n: int, moves: int) -> dict:
    import numpy as np

    from floorwidget import metrics
    from floorwidget.placer import place, refine

    out: dict = {"kind": kind, "n": n}
    if kind == "rent":
        from floorwidget.synth import rent_design

        t = time.perf_counter()
        nm = max(4, int(round(4 * math.log10(n) ** 1.5)))
        d = rent_design(n, num_macros=nm, seed=1, validate=n <= 100_000)
        out["gen_s"] = time.perf_counter() - t
        out["macros"] = nm
        t = time.perf_counter()
        c = time.process_time()
        fp = place(d, target_density=0.8, seed=0)
        out["place_s"] = time.perf_counter() - t
        out["cpu_s"] = time.process_time() - c
        out["hpwl"] = metrics.hpwl(d, fp)
        out["overflow"] = fp.info["overflow"]
        out["legal"] = bool(metrics.legality(d, fp).get("legal", False)) \
            if n <= 100_000 else None
        out["stage_s"] = fp.info["stage_seconds"]
        out["iterations"] = fp.info["stage_iterations"]
    elif kind == "ko":
        from floorwidget.synth import known_optimum_design

        side = int(round(math.sqrt(n)))
        t = time.perf_counter()
        d, opt = known_optimum_design(side, seed=0)
        out["gen_s"] = time.perf_counter() - t
        t = time.perf_counter()
        c = time.process_time()
        fp = place(d, target_density=1.0, seed=0)
        out["place_s"] = time.perf_counter() - t
        out["cpu_s"] = time.process_time() - c
        out["hpwl"] = metrics.hpwl(d, fp)
        out["ratio"] = out["hpwl"] / opt
        out["overflow"] = fp.info["overflow"]
        out["iterations"] = fp.info["stage_iterations"]
    elif kind == "refine":
        import floorwidget as fw
        from floorwidget.design import MACRO, MOVABLE

        d = fw.load(ROOT / "demo_data" / "heron_dsp.json")
        fp = place(d, seed=0)
        mac = np.flatnonzero((d.kind == MACRO) & (fp.status == MOVABLE))
        rng = np.random.default_rng(0)
        refine(d, fp)  # warm the imports
        times = []
        cpu = []
        legal = 0
        for k in range(moves):
            moved = fp.copy()
            i = mac[k % len(mac)]
            moved.x[i] += rng.uniform(-150, 150)
            moved.y[i] += rng.uniform(-150, 150)
            t = time.perf_counter()
            c = time.process_time()
            r = refine(d, moved)
            times.append(time.perf_counter() - t)
            cpu.append(time.process_time() - c)
            legal += bool(metrics.evaluate(d, r)["legal"])
        out["median_ms"] = 1e3 * float(np.median(times))
        out["p95_ms"] = 1e3 * float(np.percentile(times, 95))
        out["cpu_median_ms"] = 1e3 * float(np.median(cpu))
        out["legal"] = f"{legal}/{moves}"
    out["peak_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    return out


def _run(kind: str, n: int, moves: int) -> dict:
    cmd = [sys.executable, __file__, "--child", kind, str(n), str(moves)]
    p = subprocess.run(cmd, capture_output=True, text=True)
    if p.returncode != 0:
        return {"kind": kind, "n": n, "error": (p.stderr.strip().splitlines() or ["?"])[-1]}
    return json.loads(p.stdout.strip().splitlines()[-1])


def main(argv: list[str]) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="small sizes only (smoke run)")
    ap.add_argument("--only", default="rent,ko,refine")
    ap.add_argument("--sizes", default=None, help="comma-separated cell counts for rent")
    ap.add_argument("--child", nargs=3, help=argparse.SUPPRESS)
    a = ap.parse_args(argv)
    if a.child:
        print(json.dumps(_child(a.child[0], int(a.child[1]), int(a.child[2]))))
        return 0
    only = set(a.only.split(","))
    rent_sizes = [1000, 10_000] if a.quick else [1000, 10_000, 100_000, 1_000_000]
    if a.sizes:
        rent_sizes = [int(s) for s in a.sizes.split(",")]
    ko_sizes = [1024] if a.quick else [10_000, 100_000]
    moves = 5 if a.quick else 20
    status = 0
    def table(kind, sizes, header, row):
        nonlocal status
        print(header)
        print("|" + "|".join("---:" if c.strip() not in ("legal", "iterations") else "---"
                             for c in header.strip("|").split("|")) + "|")
        for n in sizes:
            r = _run(kind, n, 0)
            if "error" in r:
                print(f"| {n} | error: {r['error']} |")
                status = 1
                continue
            print(row(n, r), flush=True)

    if "rent" in only:
        table("rent", rent_sizes,
              "| cells | macros | generate s | place s | place CPU s | global s | cells s "
              "| peak MB | HPWL µm | overflow | legal | iterations |",
              lambda n, r: f"| {n} | {r['macros']} | {r['gen_s']:.1f} | {r['place_s']:.1f} | "
                           f"{r['cpu_s']:.1f} | {r['stage_s'].get('global', 0):.1f} | "
                           f"{r['stage_s'].get('cells', 0):.1f} | {r['peak_mb']:.0f} | "
                           f"{r['hpwl']:.4g} | {r['overflow']:.3f} | {r['legal']} | "
                           f"{r['iterations']} |")
    if "ko" in only:
        print()
        table("ko", ko_sizes,
              "| known-optimum cells | place s | place CPU s | HPWL ÷ optimum | overflow "
              "| peak MB | iterations |",
              lambda n, r: f"| {n} | {r['place_s']:.1f} | {r['cpu_s']:.1f} | "
                           f"{r['ratio']:.3f} | {r['overflow']:.3f} | {r['peak_mb']:.0f} | "
                           f"{r['iterations']} |")
    if "refine" in only:
        r = _run("refine", 0, moves)
        print(f"\n| refine after one macro move (demo, {moves} moves) | median ms | p95 ms | "
              "CPU median ms | legal |")
        print("|---|---:|---:|---:|---|")
        if "error" in r:
            print(f"| error: {r['error']} | | | |")
            status = 1
        else:
            print(f"| heron_dsp | {r['median_ms']:.1f} | {r['p95_ms']:.1f} | "
                  f"{r['cpu_median_ms']:.1f} | {r['legal']} |")
    return status


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
