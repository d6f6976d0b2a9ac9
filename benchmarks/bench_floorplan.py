"""Floorplan shape by macro layout: free against periphery, on the demo, ibm01-mixed and two
synthetic macro-heavy designs.

``python benchmarks/bench_floorplan.py [--quick] [--only demo,ibm01,synth-a,synth-b]``

Each design is placed with ``fw.place(design, seed=0, macro_layout=L)`` for L in free,
periphery, arrays and auto (the default), and measured with ``fw.evaluate``.  Columns: HPWL
(and its ratio to the free layout's), congestion p99 (demand over supply), macros on the
periphery (movable macros against the core boundary or abutted to a macro that is,
:func:`floorwidget.metrics.periphery_macros`, over all movable macros), narrow channels,
logic regions (and the largest one's share of the free area), macros with pins facing a
wall, legal, wall seconds.

Designs: ``demo`` (demo_data/heron_dsp.json), ``ibm01`` (``../shared/realdata/ibm01-mixed``,
skipped when missing), ``synth-a`` (Rent's-rule netlist, 2e4 cells, 30 macros) and ``synth-b``
(8e4 cells, 60 macros), both with 45 % of the area in macros of four memory sizes
(:func:`floorwidget.synth.rent_design`).  ``--quick``: the demo and a 1e4-cell, 20-macro
synthetic design only.

Targets (issue: floorplans an engineer would sign off), for the demo with defaults: every
movable macro on the periphery, ``narrow_channels`` 0, ``logic_regions`` 1,
``macros_facing_wall`` 0, HPWL within 1.10 x the free layout's, cong p99 no worse than free's.

The figures are early-floorplanning estimates; sign-off belongs to the implementation flow.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
DATA = ROOT.parent / "shared" / "realdata"
sys.path.insert(0, str(ROOT))

LAYOUTS = ("free", "periphery", "arrays", "auto")


def designs(quick: bool, only: set[str] | None):
    """``(name, loader)`` pairs; a loader returns a Design or None when its data is missing."""
    import floorwidget as fw
    from floorwidget.synth import rent_design

    def ibm01():
        folder = DATA / "ibm01-mixed"
        aux = next(folder.glob("*.aux"), None) if folder.is_dir() else None
        return fw.load(aux) if aux else None

    table = [("demo", lambda: fw.load(ROOT / "demo_data" / "heron_dsp.json"))]
    if quick:
        table.append(("synth-q", lambda: rent_design(10_000, num_macros=20, macro_area=0.45,
                                                     seed=1, name="synth-q")))
    else:
        table += [
            ("ibm01", ibm01),
            ("synth-a", lambda: rent_design(20_000, num_macros=30, macro_area=0.45, seed=1,
                                            name="synth-a")),
            ("synth-b", lambda: rent_design(80_000, num_macros=60, macro_area=0.45, seed=2,
                                            name="synth-b")),
        ]
    return [(n, f) for n, f in table if not only or n in only]


def measure(design, layout: str) -> dict:
    import numpy as np

    import floorwidget as fw
    from floorwidget import metrics
    from floorwidget.design import MACRO, MOVABLE

    t0 = time.perf_counter()
    fp = fw.place(design, seed=0, macro_layout=layout)
    secs = time.perf_counter() - t0
    rep = fw.evaluate(design, fp)
    mov = np.flatnonzero((design.kind == MACRO) & (fp.status == MOVABLE))
    on = np.intersect1d(metrics.periphery_macros(design, fp), mov)
    return {"layout": layout, "chosen": fp.info.get("macro_layout", layout), "rep": rep,
            "periphery": (len(on), len(mov)), "seconds": secs}


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--only", default="", help="comma-separated design names")
    args = ap.parse_args(argv)
    only = {s for s in args.only.split(",") if s} or None
    from floorwidget.placer import PlacementError

    head = (f"{'design':<9} {'layout':<14} {'HPWL':>10} {'x free':>6} {'cong p99':>8} "
            f"{'periphery':>9} {'narrow':>6} {'regions':>13} {'wall':>4} {'legal':>5} "
            f"{'s':>6}")
    print(head)
    print("-" * len(head))
    for name, load in designs(args.quick, only):
        design = load()
        if design is None:
            print(f"{name:<9} (data missing: skipped)")
            continue
        free_hpwl = None
        for layout in LAYOUTS:
            try:
                r = measure(design, layout)
            except PlacementError as e:  # a layout forced where it cannot be legal
                print(f"{name:<9} {layout:<14} fails: {str(e)[:80]}…", flush=True)
                continue
            rep = r["rep"]
            if layout == "free":
                free_hpwl = rep["hpwl"]
            lay = layout if r["chosen"] == layout else f"{layout}>{r['chosen']}"
            ratio = rep["hpwl"] / free_hpwl if free_hpwl else float("nan")
            on, n = r["periphery"]
            regions = f"{rep['logic_regions']} ({rep['largest_logic_region']:.1%})"
            print(f"{name:<9} {lay:<14} {rep['hpwl']:>10.4g} {ratio:>6.3f} "
                  f"{rep['congestion_p99']:>8.3g} {f'{on}/{n}':>9} {rep['narrow_channels']:>6} "
                  f"{regions:>13} {rep['macros_facing_wall']:>4} "
                  f"{'yes' if rep['legal'] else 'no':>5} {r['seconds']:>6.1f}", flush=True)
    print("\n(early-floorplanning estimates; sign-off belongs to the implementation flow)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
