"""Widget speed: kernel time from a drop to updated marks, and canvas build time at scale.

Targets: a drop (snap, pin, ``refine``, marks and readouts updated) on the demo design in a
median of at most 200 ms, and an arrow-key nudge likewise; a canvas for a synthetic design of
2,000 macros and 10^5 cells built in at most 2 s, with no mark holding more than a few
thousand elements.

``python benchmarks/bench_widget.py [--quick]`` prints a table (medians; the machine is noisy).
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]


def bench_drop(repeats: int) -> list[float]:
    import floorwidget as fw
    from floorwidget.widget import FloorplanWidget

    d = fw.load(ROOT / "demo_data" / "heron_dsp.json")
    s = fw.Session(d)
    s.place(seed=0)
    s.legalize()
    w = FloorplanWidget(d, session=s)
    rng = np.random.default_rng(0)
    times = []
    for r in range(repeats):
        k = int(rng.integers(len(w.macro_idx)))
        i = int(w.macro_idx[k])
        cx, cy = s.floorplan.centres()
        dx, dy = rng.uniform(-80, 80, size=2)
        t0 = time.perf_counter()
        out = w.drop(k, cx[i] + dx, cy[i] + dy, wait=True)  # move, pin, refine, readouts
        times.append(time.perf_counter() - t0)
        if not out["refined"]:
            raise RuntimeError(f"drop {r} did not refine: {out['message']}")
        w.undo()
    return times


def bench_keys(repeats: int) -> list[float]:
    """An arrow key over the canvas (what ipyevents delivers) to updated marks: one grid step
    of the selected macro through ``Session.shift``."""
    import floorwidget as fw
    from floorwidget.widget import FloorplanWidget

    d = fw.load(ROOT / "demo_data" / "heron_dsp.json")
    s = fw.Session(d)
    s.place(seed=0)
    s.legalize()
    w = FloorplanWidget(d, session=s)
    w.select([d.macros[0]])
    times = []
    for r in range(repeats):
        key = ("ArrowRight", "ArrowLeft")[r % 2]
        t0 = time.perf_counter()
        w.shortcuts.handle({"type": "keydown", "key": key})
        times.append(time.perf_counter() - t0)
    return times


def bench_build(num_cells: int, num_macros: int):
    from floorwidget.synth import rent_design
    from floorwidget.widget.canvas import Canvas

    t0 = time.perf_counter()
    d = rent_design(num_cells, num_macros=num_macros, seed=0)
    t_gen = time.perf_counter() - t0
    fp = d.initial
    # a spread floorplan: every block somewhere in the core (the placer is not measured here)
    rng = np.random.default_rng(1)
    c = d.core
    w, h = fp.sizes()
    fp = fp.copy()
    mov = fp.status == 0
    fp.x[mov] = rng.uniform(c[0], np.maximum(c[0], c[2] - w[mov]))
    fp.y[mov] = rng.uniform(c[1], np.maximum(c[1], c[3] - h[mov]))
    Canvas(d, fp, size=200)  # warm-up: imports and first widget construction
    times = []
    for _ in range(3):
        t0 = time.perf_counter()
        cv = Canvas(d, fp, size=640)
        times.append(time.perf_counter() - t0)
    counts = cv.element_counts()
    big = max(counts, key=counts.get)
    return d, t_gen, times, big, counts[big]


def main(argv: list[str]) -> int:
    quick = "--quick" in argv
    repeats = 5 if quick else 20
    cells, macros = (10_000, 200) if quick else (100_000, 2_000)
    drop = np.array(bench_drop(repeats)) * 1e3
    keys = np.array(bench_keys(repeats)) * 1e3
    d, t_gen, build, big, n_big = bench_build(cells, macros)
    build = np.array(build)
    print(f"{'measure':<44} {'median':>10} {'p95':>10} {'target':>10}")
    print(f"{'drop -> marks, demo, incl. refine (ms, n=' + str(repeats) + ')':<44} "
          f"{np.median(drop):>10.1f} {np.percentile(drop, 95):>10.1f} {'<= 200':>10}")
    print(f"{'arrow key -> nudge, marks, demo (ms, n=' + str(repeats) + ')':<44} "
          f"{np.median(keys):>10.1f} {np.percentile(keys, 95):>10.1f} {'<= 200':>10}")
    label = f"canvas build, {macros} macros + {cells} cells (s)"
    print(f"{label:<44} {np.median(build):>10.2f} {np.max(build):>10.2f} {'<= 2':>10}")
    print(f"largest mark: {big} with {n_big} elements; design {d!r} "
          f"(generated in {t_gen:.1f} s)")
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
