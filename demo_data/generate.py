"""Make the demo design: ``heron_dsp``, an invented vision-DSP block of our imaginary "Heron" chip.

2.4 mm x 2.0 mm die, 30 hard macros of seven sizes (single-port SRAMs, dual-port SRAMs, register
files, a sensor ADC front end, a clock generator and two link PHYs that belong on the south
edge), 460 soft clusters of standard-cell logic in six functional groups, and I/O buses on all
four edges.  Every name and number here is made up for the demo.

Run ``python demo_data/generate.py`` to rewrite ``demo_data/heron_dsp.json`` (deterministic).
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from floorwidget.design import CLUSTER, FIXED, MACRO, TERMINAL, Design, orient_mask  # noqa: E402
from floorwidget.formats.native_json import write_json  # noqa: E402

DIE = (0.0, 0.0, 2400.0, 2000.0)
CORE_MARGIN = 20.0
ROW_H, SITE_W = 1.8, 0.2

# name pattern, count, width, height, group, orientations
MACROS = [
    ("sram_sp4k", 8, 210.0, 150.0, "dsp", None),
    ("sram_sp2k", 8, 140.0, 110.0, "dsp", None),
    ("sram_dp1k", 6, 220.0, 160.0, "ctl", None),
    ("rf_512", 4, 90.0, 70.0, "ctl", None),
    ("adc_front", 1, 300.0, 260.0, "ana", ("N", "FN")),
    ("clk_gen", 1, 180.0, 180.0, "ana", ("N", "FN", "S", "FS")),
    ("lnk_phy", 2, 480.0, 160.0, "lnk", ("N", "FN")),
]
GROUPS = {"ctl": 60, "dsp0": 80, "dsp1": 80, "dsp2": 80, "dsp3": 80, "lnk": 50, "ana": 30}


def build(seed: int = 7) -> Design:
    rng = np.random.default_rng(seed)
    names, kind, w, h, halo, allowed, types = [], [], [], [], [], [], []
    x, y, status = [], [], []
    group_of: dict[str, list[int]] = {g: [] for g in GROUPS}
    macro_group: list[tuple[int, str]] = []

    def add(nm, k, ww, hh, hl=0.0, al=1, tp="", px=0.0, py=0.0, st=0):
        names.append(nm)
        kind.append(k)
        w.append(ww)
        h.append(hh)
        halo.append([hl] * 4)
        allowed.append(al)
        types.append(tp)
        x.append(px)
        y.append(py)
        status.append(st)
        return len(names) - 1

    # macros: the memories are split round-robin over the four DSP lanes
    for base, count, mw, mh, grp, ors in MACROS:
        al = 0xFF if ors is None else orient_mask(ors)
        for j in range(count):
            nm = f"{base}_{j}" if count > 1 else base
            g = f"dsp{j % 4}" if grp == "dsp" else grp
            i = add(nm, MACRO, mw, mh, hl=5.0, al=al, tp=base.upper())
            macro_group.append((i, g))
    # soft clusters: 60 µm-ish squares of standard-cell logic with some spread in size
    for g, count in GROUPS.items():
        for j in range(count):
            side = float(np.round(rng.uniform(48.0, 72.0), 1))
            aspect = float(np.round(rng.uniform(0.8, 1.25), 2))
            i = add(f"{g}/u{j}", CLUSTER, side, float(np.round(side * aspect, 1)), tp="SOFT")
            group_of[g].append(i)

    nets: list[tuple[str, list[tuple[int, float, float]]]] = []

    def pin(i, dx=0.0, dy=0.0):
        return (i, dx, dy)

    # local logic nets within each group, a few across neighbouring groups
    order = list(GROUPS)
    for gi, g in enumerate(order):
        members = group_of[g]
        for j, c in enumerate(members):
            for t in range(3):
                deg = int(rng.choice([2, 2, 3, 4]))
                others = rng.choice(members, size=deg - 1, replace=False)
                pins = [pin(c)] + [pin(int(o)) for o in others if int(o) != c]
                if len(pins) >= 2:
                    nets.append((f"{g}/n{j}_{t}", pins))
        for j in range(len(members) // 6):
            other = order[(gi + 1) % len(order)]
            a = int(rng.choice(members))
            b = int(rng.choice(group_of[other]))
            nets.append((f"{g}_{other}/x{j}", [pin(a), pin(b)]))

    # macro buses: pins on the macro's south edge (N orientation), each to 2-3 group clusters
    for i, g in macro_group:
        mw, mh = w[i], h[i]
        nbus = 8 if names[i].startswith("lnk") else 6
        for b in range(nbus):
            dx = -mw / 2 + mw * (b + 0.5) / nbus
            cl = rng.choice(group_of[g], size=int(rng.integers(2, 4)), replace=False)
            nets.append((f"{names[i]}/bus{b}", [pin(i, round(dx, 3), -mh / 2 + 1.0)]
                         + [pin(int(c)) for c in cl]))

    # I/O buses on the die edges
    def io(prefix, count, side, lo, hi):
        out = []
        for k in range(count):
            t = lo + (hi - lo) * (k + 0.5) / count
            px, py = {"W": (0.0, t), "E": (DIE[2] - 1.0, t), "S": (t, 0.0),
                      "N": (t, DIE[3] - 1.0)}[side]
            out.append(add(f"{prefix}[{k}]", TERMINAL, 1.0, 1.0, px=px, py=py, st=FIXED))
        return out

    host = io("host_d", 32, "W", 500.0, 1500.0)
    gpio = io("gpio", 8, "E", 800.0, 1200.0)
    lnk_tx = io("lnk_tx", 16, "S", 300.0, 1100.0)
    lnk_rx = io("lnk_rx", 16, "S", 1300.0, 2100.0)
    sns = io("sns_d", 12, "N", 1500.0, 2100.0)
    clk = io("clk_ref", 1, "N", 400.0, 420.0)

    ctl = group_of["ctl"]
    for k, t in enumerate(host + gpio):
        nets.append((f"io/{names[t]}", [pin(t), pin(ctl[k % len(ctl)]),
                                         pin(ctl[(k * 7 + 3) % len(ctl)])]))
    phy = [i for i, _ in macro_group if names[i].startswith("lnk_phy")]
    for k, t in enumerate(lnk_tx):
        nets.append((f"io/{names[t]}", [pin(t), pin(phy[0], -240.0 + 30.0 * k + 15.0, -79.0)]))
    for k, t in enumerate(lnk_rx):
        nets.append((f"io/{names[t]}", [pin(t), pin(phy[1], -240.0 + 30.0 * k + 15.0, -79.0)]))
    adc = names.index("adc_front")
    for k, t in enumerate(sns):
        nets.append((f"io/{names[t]}", [pin(t), pin(adc, -140.0 + 280.0 * k / 11, 129.0)]))
    nets.append(("io/clk_ref", [pin(clk[0]), pin(names.index("clk_gen"), 0.0, 89.0)]))

    starts = np.cumsum([0] + [len(p) for _, p in nets])
    flat = [p for _, ps in nets for p in ps]
    core = (DIE[0] + CORE_MARGIN, DIE[1] + CORE_MARGIN, DIE[2] - CORE_MARGIN,
            DIE[3] - CORE_MARGIN)
    nrows = int((core[3] - core[1]) // ROW_H)
    nsites = int(round((core[2] - core[0]) / SITE_W))
    rows = {"x": np.full(nrows, core[0]), "y": core[1] + ROW_H * np.arange(nrows),
            "height": np.full(nrows, ROW_H), "site_width": np.full(nrows, SITE_W),
            "num_sites": np.full(nrows, nsites), "orient": np.where(np.arange(nrows) % 2, 5, 0),
            "site_name": "hd_core"}
    blockages = [[1080.0, 900.0, 1320.0, 1100.0]]  # reserved for a later power-switch array
    d = Design("heron_dsp", DIE, names, kind, w, h, starts,
               [p[0] for p in flat], [p[1] for p in flat], [p[2] for p in flat],
               halo=halo, orient_allowed=allowed, net_names=[nm for nm, _ in nets],
               rows=rows, grid_pitch=(1.0, ROW_H), blockages=blockages, block_type=types,
               x=x, y=y, status=status, dbu=2000)
    # start every movable object at the core centre: the placer decides the rest
    mov = d.initial.status == 0
    d.initial.x[mov] = (core[0] + core[2]) / 2 - d.width[mov] / 2
    d.initial.y[mov] = (core[1] + core[3]) / 2 - d.height[mov] / 2
    return d


if __name__ == "__main__":
    out = Path(__file__).with_name("heron_dsp.json")
    design = build()
    write_json(design, design.initial, out)
    print(f"wrote {out}: {design!r}")
