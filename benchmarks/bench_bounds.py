"""Bounded cost on hostile but small inputs (issue 23): each case prints its median time and
peak traced memory (``tracemalloc``, Python and numpy allocations) over ``--repeat`` runs.

Target: every case well under a second and far under 4 GB (inputs under 10 MB).

Cases: a rectilinear polygon of 40,000 vertices as rectangles (inside and bounding box minus
it); a REGION of 20,000 rectangles validated (overlap sweep); a 100,000-blockage picture
rendered to PNG; ``Session.array`` of 10^9 x 10^9 cells for six macros refused; a gzip bomb
(1 GiB of text in 2 MB) refused; the fill of 100,000 partial blockages by 10^6 cells
(``covered_share``); the macro legaliser among 100,000 small blockages scattered over part
of the core, with room for the macros (400 of them; the greedy search) and with almost none
(the sequence-pair search, refused when its budget is spent: its budget is about 20 s, the
one case over a second).

Usage::

    python benchmarks/bench_bounds.py            # five repeats
    python benchmarks/bench_bounds.py --quick    # one
"""

from __future__ import annotations

import argparse
import gzip
import statistics
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import floorwidget as fw  # noqa: E402
from floorwidget.design import CellRegions, DesignError, Floorplan  # noqa: E402
from floorwidget.kernels.fill import covered_share  # noqa: E402
from floorwidget.kernels.polygon import polygon_rects  # noqa: E402
from floorwidget.placer.errors import PlacementError  # noqa: E402
from floorwidget.placer.legalize import legalize_macros  # noqa: E402
from floorwidget.synth import rent_design  # noqa: E402


def comb(teeth: int) -> np.ndarray:
    """A comb outline of ``4 * teeth`` vertices (teeth of random heights on a base)."""
    h = np.random.default_rng(0).integers(1, 1000, teeth).astype(float)
    t = np.arange(teeth - 1, -1, -1, dtype=float)
    tops = np.stack([np.stack([2 * t + 1, h[::-1]], 1), np.stack([2 * t, h[::-1]], 1),
                     np.stack([2 * t, np.full(teeth, 0.5)], 1),
                     np.stack([2 * t - 1, np.full(teeth, 0.5)], 1)], axis=1).reshape(-1, 2)
    return np.concatenate([[[0.0, -1.0], [2.0 * teeth - 1, -1.0]], tops[:-2]])


def scattered_blockages(n_macros: int, macro_area: float, free: float) -> fw.Design:
    """A design of ``n_macros`` macros and 100,000 small blockages over the left ``1 - free``
    of its core, half of that area covered (far too tight for any macro between them)."""
    d = rent_design(2000, seed=0, num_macros=n_macros, macro_area=macro_area)
    c = d.core
    xr = c[0] + (c[2] - c[0]) * (1 - free)
    side = np.sqrt(0.5 * (xr - c[0]) * (c[3] - c[1]) / 100_000)
    rng = np.random.default_rng(0)
    lo = rng.uniform([c[0], c[1]], [xr - side, c[3] - side], (100_000, 2))
    return d.derive(blockages=np.concatenate([lo, lo + side], axis=1))


def measure(fn, repeat: int) -> tuple[float, float]:
    """Median wall time over ``repeat`` plain runs, then the peak of one traced run (tracing
    slows Python-heavy code several times, so it is kept out of the timed runs)."""
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    tracemalloc.start()
    fn()
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    return statistics.median(times), peak / 2**20


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--repeat", type=int, default=5)
    a = ap.parse_args(argv)
    repeat = 1 if a.quick else a.repeat

    pts = comb(10_000)
    d = rent_design(2000, seed=1, num_macros=6, macro_area=0.3)
    die = d.die
    y = np.linspace(die[1], die[3], 20_001)
    strips = np.stack([np.full(20_000, die[0]), y[:-1], np.full(20_000, die[2]), y[1:]], 1)
    rng = np.random.default_rng(0)
    c = d.core
    lo = rng.uniform(c[:2], c[2:] - 1.0, (100_000, 2))
    many = d.derive(blockages=np.concatenate([lo, lo + 0.5], axis=1),
                    blockage_max_density=np.where(np.arange(100_000) % 2, 0.3, 0.0))
    fp = fw.place(d)
    placed = Floorplan(many, fp.x, fp.y, fp.orient, fp.status)
    s = fw.Session(d)

    def region():
        reg = CellRegions.build(d.num_blocks, [{"name": "r", "type": "fence", "rects": strips}])
        assert not reg.problems(d)

    def array():  # refused before allocating (rows x columns beyond the macros)
        try:
            s.array(d.macros, 10**9, 10**9)
        except DesignError:
            return
        raise AssertionError("array made")

    tmp = Path(tempfile.mkdtemp())
    bomb = tmp / "bomb.def.gz"
    bomb.write_bytes(gzip.compress(b"- u1 INV ;\n" * 400_000, 9) * 250)

    def refuse():
        try:
            fw.load(bomb)
        except DesignError:
            return
        raise AssertionError("bomb read")

    # 10^6 abutting cells on 1,000 rows, 100,000 small partial blockages over them
    cx, cy = np.meshgrid(np.arange(1000) * 0.5, np.arange(1000) * 2.0)
    cells = np.stack([cx.ravel(), cy.ravel(), cx.ravel() + 0.5, cy.ravel() + 2.0], axis=1)
    blo = rng.uniform(0, 490, (100_000, 2)) * [1, 4]
    small = np.concatenate([blo, blo + [3.0, 5.0]], axis=1)

    roomy = scattered_blockages(400, 0.2, 0.5)
    tight = scattered_blockages(400, 0.2, 0.2)

    def tight_refused():
        try:
            legalize_macros(tight, tight.initial)
        except PlacementError:
            return
        raise AssertionError("placed")

    cases = [
        (f"polygon {len(pts)} vertices -> rectangles", lambda: polygon_rects(pts, True)),
        (f"polygon {len(pts)} vertices, box minus it", lambda: polygon_rects(pts, False)),
        ("region of 20,000 rectangles validated", region),
        ("100,000 blockages (half partial) rendered to PNG",
         lambda: fw.render(many, placed, tmp / "many.png")),
        ("Session.array(6 macros, 10^9, 10^9) refused", array),
        (f"gzip bomb ({bomb.stat().st_size >> 10} KiB -> 1 GiB) refused", refuse),
        ("fill of 100,000 partial blockages by 10^6 cells", lambda: covered_share(small, cells)),
        ("legaliser: 400 macros, 100,000 blockages, room", lambda: legalize_macros(
            roomy, roomy.initial)),
        ("legaliser: 400 macros, 100,000 blockages, no room (refused)", tight_refused),
    ]
    print(f"| case | median s ({repeat} runs) | peak traced MiB |")
    print("| --- | --- | --- |")
    for name, fn in cases:
        t, m = measure(fn, repeat)
        print(f"| {name} | {t:.3f} | {m:.0f} |", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
