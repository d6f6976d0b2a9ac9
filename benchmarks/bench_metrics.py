"""Speed of the metrics: evaluate() and its parts on the demo and on synthetic Rent's-rule designs.

``python benchmarks/bench_metrics.py [--quick]`` prints a table of median times (ms).  The
synthetic designs come from :func:`floorwidget.synth.rent_design` with the cells and macros
scattered uniformly over the core (a spread placement, like a placer's mid-run state).
``--quick`` runs the demo and a 10^4-cell design only.
"""

from __future__ import annotations

import statistics
import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import floorwidget as fw  # noqa: E402
from floorwidget import metrics as M  # noqa: E402
from floorwidget.design import MACRO, MOVABLE  # noqa: E402


def median_ms(fn, repeat: int, clock=time.perf_counter) -> float:
    fn()  # warm up
    times = []
    for _ in range(repeat):
        t = clock()
        fn()
        times.append(clock() - t)
    return 1e3 * statistics.median(times)


def scattered(design, seed=0):
    rng = np.random.default_rng(seed)
    fp = design.initial.copy()
    mov = fp.status == MOVABLE
    w, h = fp.sizes()
    c = design.core
    fp.x[mov] = rng.uniform(c[0], c[2] - w[mov])
    fp.y[mov] = rng.uniform(c[1], c[3] - h[mov])
    return fp


def cases(quick: bool):
    demo = fw.load(ROOT / "demo_data" / "heron_dsp.json")
    yield "demo (initial pile)", demo, demo.initial
    yield "demo (scattered)", demo, scattered(demo)
    from floorwidget.synth import rent_design

    sizes = [(10_000, 20)] if quick else [(100_000, 100), (1_000_000, 400)]
    for n, nm in sizes:
        d = rent_design(n, num_macros=nm, seed=1)
        yield f"rent {n:.0e} cells, {nm} macros", d, scattered(d)


def measure(label, d, fp) -> dict:
    rep = 3 if d.num_blocks > 200_000 else 11
    g = M.bin_grid(d)
    mac = np.flatnonzero(d.kind == MACRO)
    drag_nets = d.nets_of(mac[:1]) if len(mac) else np.arange(min(10, d.num_nets))
    return {
        "case": label,
        "blocks": d.num_blocks,
        "nets": d.num_nets,
        "pins": d.num_pins,
        "bins": f"{g.nx}x{g.ny}",
        "hpwl": median_ms(lambda: M.net_hpwl(d, fp), rep),
        "density": median_ms(lambda: M.density_map(d, fp, g), rep),
        "rudy": median_ms(lambda: M.rudy_map(d, fp, g), rep),
        "legality": median_ms(lambda: M.legality(d, fp), rep),
        "evaluate": median_ms(lambda: M.evaluate(d, fp), rep),
        "evaluate cpu": median_ms(lambda: M.evaluate(d, fp), rep, time.process_time),
        "drag nets": median_ms(lambda: M.nets_hpwl(d, fp, drag_nets), rep),
    }


def main(argv: list[str]) -> int:
    quick = "--quick" in argv
    rows = []
    for label, d, fp in cases(quick):
        rows.append(measure(label, d, fp))
        print(f"  done: {label}", file=sys.stderr, flush=True)
    cols = ["case", "blocks", "nets", "pins", "bins", "hpwl", "density", "rudy", "legality",
            "evaluate", "evaluate cpu", "drag nets"]
    print("median milliseconds per call, wall clock ('evaluate cpu': process CPU time, less "
          "sensitive to a shared machine)\n")
    print("| " + " | ".join(cols) + " |")
    print("|" + "|".join("---" for _ in cols) + "|")
    for r in rows:
        cells = [f"{r[c]:.2f}" if isinstance(r[c], float) else str(r[c]) for c in cols]
        print("| " + " | ".join(cells) + " |")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
