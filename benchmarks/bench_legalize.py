"""Macro legalisation speed: random macros at 60 % area, scattered and spread starts, a hand
move and an already-legal input; and, when ``../shared/realdata`` is there, the GSRC n200 and
n300 outlines at 10 % whitespace (blocks ~91 % of the outline: the greedy search fails and the
sequence-pair packing runs).  Prints a table; ``--quick`` for small sizes (GSRC n200 only)."""

from __future__ import annotations

import sys
import time
from pathlib import Path

import numpy as np

from floorwidget.design import Design, Floorplan
from floorwidget.placer.legalize import is_legal, legalize_macros


def _bench_design(n: int, util: float, seed: int = 0) -> tuple[Design, Floorplan]:
    """``n`` random macros at ``util`` (halo area / core area) with overlapping starting spots
    drawn around a legal shelf packing (a stand-in for a spread global placement)."""
    rng = np.random.default_rng(seed)
    w = rng.uniform(20, 120, n).round(1)
    h = (w * rng.uniform(0.5, 2.0, n)).round(1)
    halo = np.full((n, 4), 2.0)
    area = ((w + 4) * (h + 4)).sum()
    side = float(np.sqrt(area / util))
    die = (0.0, 0.0, side * 1.02 + 20, side + 20)
    ox, oy = 10.0, 10.0
    # the spots scatter uniformly: the worst plausible start, everything overlaps somewhere
    x = rng.uniform(10, side * 1.02 - 120 + 10, n)
    y = rng.uniform(10, side - 240 + 10, n)
    d = Design(f"bench{n}", die, [f"m{i}" for i in range(n)], np.zeros(n), w, h,
               np.array([0]), np.zeros(0, int), np.zeros(0), np.zeros(0), halo=halo,
               grid_pitch=(0.2, 1.0), grid_origin=(ox, oy),
               x=x, y=y, validate=False)
    d.core = np.array([ox, oy, die[2] - 10, die[3] - 10])
    return d, d.initial


def _spread_start(d: Design, legal: Floorplan, shrink: float = 0.93, noise: float = 8.0,
                  seed: int = 0) -> Floorplan:
    """A global-placement-like start: a legal packing pulled 7 % towards the centre plus
    Gaussian jitter, so that neighbours overlap by a few µm everywhere."""
    rng = np.random.default_rng(seed)
    g = legal.copy()
    cx, cy = (d.core[0] + d.core[2]) / 2, (d.core[1] + d.core[3]) / 2
    g.x = cx + (legal.x - cx) * shrink + rng.normal(0, noise, d.num_blocks)
    g.y = cy + (legal.y - cy) * shrink + rng.normal(0, noise, d.num_blocks)
    return g


def _main(argv: list[str]) -> int:
    quick = "--quick" in argv
    sizes = [30, 200] if quick else [30, 500, 2000]
    print("Macro legalisation (median of repeats; wall-clock s on this machine)")
    print(f"{'case':<40}{'median s':>10}{'moved':>8}{'disp/macro µm':>15}{'mode':>11}")

    def row(label, d, start, reps, **kw):
        times, res = [], None
        for _ in range(reps):
            t = time.perf_counter()
            res = legalize_macros(d, start, **kw)
            times.append(time.perf_counter() - t)
        n_ = max(res.info["legalize_moved"], 1)
        print(f"{label:<40}{np.median(times):>10.4f}{res.info['legalize_moved']:>8}"
              f"{res.info['legalize_displacement'] / n_:>15.1f}{res.info['legalize_mode']:>11}",
              flush=True)
        return res

    for n in sizes:
        d, fp = _bench_design(n, 0.6, seed=1)
        reps = 5 if n <= 500 else 3
        res = row(f"{n} macros 60 %: scattered start", d, fp, reps)
        assert is_legal(d, res)
        sp = _spread_start(d, res)
        res2 = row(f"{n} macros 60 %: spread start", d, sp, reps)
        assert is_legal(d, res2)
        row(f"{n} macros 60 %: spread start, no LP", d, sp, reps, lp=False)
        moved = res.copy()  # a hand move: drag one macro onto another
        moved.x[0], moved.y[0] = res.x[n // 2] + 3.0, res.y[n // 2] + 2.0
        row(f"{n} macros: one hand move", d, moved, 11, keep=[0])
        row(f"{n} macros: already legal", d, res, 11)
    real = Path(__file__).resolve().parents[2] / "shared" / "realdata"
    for name in ["n200"] if quick else ["n200", "n300"]:
        path = real / f"gsrc-{name}" / f"{name}.hardblocks"
        if not path.exists():
            continue
        import floorwidget as fw
        from floorwidget.design import MACRO

        d = fw.load(path)
        fp = d.initial.copy()
        mac = d.kind == MACRO
        rng = np.random.default_rng(0)  # blocks scattered over the outline
        fp.x[mac] = rng.uniform(d.die[0], d.die[2] - d.width[mac])
        fp.y[mac] = rng.uniform(d.die[1], d.die[3] - d.height[mac])
        res = row(f"GSRC {name} 10 % whitespace: scattered", d, fp, 1)
        assert is_legal(d, res)
    return 0


if __name__ == "__main__":
    sys.exit(_main(sys.argv[1:]))
