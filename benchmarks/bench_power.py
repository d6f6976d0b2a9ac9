"""Power grid: how long laying, drawing, writing and reading it take, and what it costs the
placement.

Part 1, ariane136 (145,776 components, 136 SRAMs; ``../shared/realdata``): build the grid
(``build_grid``), lay it out for a floorplan (straps and followpins cut over the SRAMs:
``Design.power_shapes``), the Session action, writing the DEF back with the grid, parsing the
``SPECIALNETS`` section back, and the channel repair with every SRAM movable
(``clear_strap_channels``: how many clipped a strap before, how many after, the largest move).
Part 2, a synthetic Rent's-rule design (``--cells``, 8 macros): ``place`` without and with a
grid whose low straps are partial blockages; HPWL, the largest share of a strap covered by
cells, ``straps_blocked``.  Medians of ``--repeat`` runs; the machine is shared, so read them
as rough.  Targets: laying out the grid for a floorplan well under the 0.1 s a canvas redraw
allows; the Session action under 50 ms on ariane136.

Usage::

    python benchmarks/bench_power.py              # both parts
    python benchmarks/bench_power.py --skip-real  # part 2 only
"""

from __future__ import annotations

import argparse
import gzip
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

ARIANE_GRID = dict(strap_layers=("M5", "M4"), strap_width=0.864, strap_spacing=0.432,
                   strap_pitch=(20.16, 25.92), strap_offset=(5.0, 6.0),
                   ring_layers=("M8", "M7"), ring_width=1.2, ring_spacing=0.6, ring_offset=0.6)


def _median(fn, repeat: int) -> tuple[float, object]:
    ts, out = [], None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        ts.append(time.perf_counter() - t)
    return statistics.median(ts), out


def _lefs(folder: Path) -> list[str]:
    lefs = sorted(folder.glob("*.lef"))
    tech = [p for p in lefs if "tech" in p.name]
    srams = [p for p in lefs if p.name.startswith("sram")]
    return [str(p) for p in tech + [p for p in lefs if p not in tech and p not in srams]
            + srams]


def real(repeat: int) -> None:
    import floorwidget as fw
    from floorwidget.design import MACRO, MOVABLE
    from floorwidget.floorplan.power import GridSpec, build_grid
    from floorwidget.formats.lefdef.specialnets import parse_specialnets
    from floorwidget.placer.straps import clear_strap_channels
    from floorwidget.session import Session

    folder = DATA / "ariane136"
    with tempfile.TemporaryDirectory() as tmp:
        src = Path(tmp) / "ariane136.def"
        src.write_bytes(gzip.decompress((folder / "ariane136.def.gz").read_bytes()))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            d = fw.load(str(src), lef=_lefs(folder))
        spec = GridSpec(**ARIANE_GRID)
        rows = []
        t, g = _median(lambda: build_grid(d, spec), repeat)
        rows.append(("build_grid", t, f"{len(g)} shapes"))
        dg = d.derive(power=g)
        t, shapes = _median(lambda: dg.power_shapes(dg.initial), repeat)
        rows.append(("power_shapes (cut over 136 SRAMs)", t, f"{len(shapes)} shapes"))
        s = Session(d)
        t, _ = _median(lambda: s.power_grid(spec), repeat)
        rows.append(("Session.power_grid", t, ""))
        out = Path(tmp) / "out.def"
        t, _ = _median(lambda: fw.save(dg, dg.initial, out), repeat)
        rows.append(("DEF write-back with the grid", t, f"{out.stat().st_size / 1e6:.1f} MB"))
        text = out.read_text()
        a = text.index("SPECIALNETS")
        b = text.index("END SPECIALNETS")
        from collections import Counter

        t, parsed = _median(lambda: parse_specialnets(text[a:b], a, 1000.0, Counter()),
                            repeat)
        rows.append(("parse SPECIALNETS", t, f"{len(parsed['rects'])} shapes"))
        fp = dg.initial.copy()
        mac = np.flatnonzero(d.kind == MACRO)
        fp.status[mac] = MOVABLE
        before = fw.evaluate(dg, fp)["straps_blocked"]
        t, (fixed, left) = _median(lambda: clear_strap_channels(dg, fp), repeat)
        moved = np.hypot(fixed.x[mac] - fp.x[mac], fixed.y[mac] - fp.y[mac])
        rows.append(("clear_strap_channels", t,
                     f"{before} macros clipping a strap -> {left}; "
                     f"{int((moved > 0).sum())} moved, largest {moved.max():.2f} µm"))
    print("ariane136 (median of", repeat, "runs)")
    print("| step | seconds | result |\n|---|---:|---|")
    for name, t, note in rows:
        print(f"| {name} | {t:.3f} | {note} |")


def synthetic(cells: int, repeat: int) -> None:
    import shapely

    import floorwidget as fw
    from floorwidget.design import CELL
    from floorwidget.floorplan.power import GridSpec, build_grid
    from floorwidget.synth import rent_design

    d = rent_design(cells, seed=2, num_macros=8, macro_area=0.25, utilisation=0.6)
    c = d.core
    pitch = (c[2] - c[0]) / 12
    spec = GridSpec(strap_layers=("M2", "M3"), strap_width=pitch / 12,
                    strap_spacing=pitch / 24, strap_pitch=pitch, strap_offset=pitch / 2,
                    cell_density=0.3)
    dg = d.derive(power=build_grid(d, spec))
    print(f"\nsynthetic, {cells} cells, 8 macros, straps every {pitch:.1f} µm "
          f"(cap {spec.cell_density}) (median of {repeat} runs)")
    print("| grid | place s | HPWL | largest strap fill | straps_blocked |\n"
          "|---|---:|---:|---:|---:|")
    for name, des in (("none", d), ("straps", dg)):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            t, fp = _median(lambda des=des: fw.place(des, seed=0), repeat)
        rep = fw.evaluate(dg, fp)
        cellu = shapely.union_all(shapely.box(*fp.rects()[d.kind == CELL].T))
        g = dg.power
        st = shapely.box(*g.rects[g.low_stripes()].T)
        st = shapely.intersection(st, shapely.box(*c))
        fill = max(shapely.intersection(s, cellu).area / s.area for s in st if s.area)
        print(f"| {name} | {t:.1f} | {rep['hpwl']:.4g} | {fill:.3f} | "
              f"{rep['straps_blocked']} |")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--cells", type=int, default=5000)
    ap.add_argument("--skip-real", action="store_true")
    a = ap.parse_args()
    if not a.skip_real:
        real(a.repeat)
    synthetic(a.cells, a.repeat)


if __name__ == "__main__":
    main()
