"""Arrays of identical macros and their greedy placement (the ``"arrays"`` macro layout).

Checks against things outside the placer:

* a known best arrangement: two banks of memories, each wired only to I/O pins on one edge,
  belong on that edge's side of the core (the HPWL of every net is then at its lower bound
  along x: closed form);
* identical macros of one bank stay one block, at the pitch the halo rule gives (common
  practice: abutted under the halo rule), checked with shapely;
* the channel a side's pins need, computed by hand from the pin count and the layer pitches
  (one track per pin along the channel: common practice).
"""

from __future__ import annotations

import numpy as np
import pytest
from shapely import box
from shapely.ops import unary_union

import floorwidget as fw
from floorwidget.design import FIXED, MACRO, TERMINAL, Design
from floorwidget.placer.macro_arrays import (
    ArrayPlan,
    array_key,
    macro_arrays,
    pin_channel,
    shape_options,
    side_pins,
)
from floorwidget.placer.macro_layout import choose_layout


def _banks(n_per_bank=4, size=(20.0, 40.0), halo=2.0, pins_per_macro=3):
    """A 400 x 400 µm core; bank ``mem_a[*]`` wired to pads on the left edge, bank
    ``mem_b[*]`` to pads on the right edge; every macro's pins on its left side."""
    w, h = size
    names, kind, ws, hs, xs, ys, st = [], [], [], [], [], [], []
    for b in "ab":
        for k in range(n_per_bank):
            names.append(f"mem_{b}[{k}]")
            kind.append(MACRO)
            ws.append(w)
            hs.append(h)
            xs.append(0.0)
            ys.append(0.0)
            st.append(0)
    pads = []
    for b, x in (("a", 0.0), ("b", 400.0)):
        for k in range(n_per_bank * pins_per_macro):
            pads.append(len(names))
            names.append(f"pad_{b}[{k}]")
            kind.append(TERMINAL)
            ws.append(0.0)
            hs.append(0.0)
            xs.append(x)
            ys.append(150.0 + 100.0 * k / (n_per_bank * pins_per_macro))
            st.append(FIXED)
    nets = []
    for m in range(2 * n_per_bank):
        for p in range(pins_per_macro):
            pad = pads[m * pins_per_macro + p]
            nets.append([(m, -w / 2, -h / 2 + (p + 1) * h / (pins_per_macro + 1)),
                         (pad, 0.0, 0.0)])
    start = np.cumsum([0] + [len(n) for n in nets])
    flat = [p for n in nets for p in n]
    rows = {"x": np.zeros(200), "y": np.arange(200) * 2.0, "height": np.full(200, 2.0),
            "site_width": np.full(200, 0.5), "num_sites": np.full(200, 800)}
    halos = np.where(np.array(kind)[:, None] == MACRO, halo, 0.0) * np.ones((1, 4))
    return Design("banks", (0, 0, 400, 400), names, kind, ws, hs, start,
                  [p[0] for p in flat], [p[1] for p in flat], [p[2] for p in flat],
                  halo=halos, rows=rows, x=xs, y=ys, status=st)


def test_array_key_and_banks():
    assert array_key(r"blk\[1\].mem\[3\].ram") == r"blk\[1\].mem*.ram"
    assert array_key("ram_7") == "ram_*"
    assert array_key("pll") == "pll"
    d = _banks()
    mac = np.flatnonzero(d.kind == MACRO)
    groups = macro_arrays(d, d.initial, mac)
    assert sorted(sorted(d.names[i] for i in g) for g in groups) == [
        [f"mem_a[{k}]" for k in range(4)], [f"mem_b[{k}]" for k in range(4)]]
    # a bank larger than the cap is cut into parts of even size
    assert sorted(len(g) for g in macro_arrays(d, d.initial, mac, max_size=2)) == [2] * 4
    assert (1, 8) in shape_options(8) and (8, 1) in shape_options(8)


def test_two_banks_go_to_their_pads_and_stay_arrays():
    d = _banks()
    fp = fw.place(d, macro_layout="arrays", seed=0)
    assert fp.info["macro_layout"] == "arrays"
    assert fw.evaluate(d, fp)["legal"]
    cx, _ = fp.centres()
    a = [d.block(f"mem_a[{k}]") for k in range(4)]
    b = [d.block(f"mem_b[{k}]") for k in range(4)]
    # the known best arrangement: each bank on its pads' side of the core
    assert cx[a].max() < 200 < cx[b].min()
    for bank in (a, b):
        # one block: the footprints grown by half the facing separation (the halo) touch
        # each other, so their union is one polygon (shapely), and corners sit on the pitch
        r = fp.rects()[bank]
        grown = unary_union([box(*q).buffer(d.halo[bank[0]].max() / 2 + 1e-6,
                                            join_style="mitre") for q in r])
        assert grown.geom_type == "Polygon"
        px = np.ceil((20 + 2) / d.grid_pitch[0] - 1e-9) * d.grid_pitch[0]
        dx = (r[:, 0] - r[:, 0].min()) / px
        assert np.allclose(dx, np.round(dx))


def test_auto_picks_arrays_for_many_banked_macros_and_free_for_unrelated_ones():
    d = _banks(n_per_bank=80, size=(4.0, 8.0), pins_per_macro=1)
    mac = np.flatnonzero(d.kind == MACRO)
    assert len(mac) > 128
    assert choose_layout(d, d.initial, mac, "auto") == "arrays"
    lone = d.derive()
    lone.names = [f"blk{i}" for i in range(d.num_blocks)]  # no banks: every name its own
    lone._index = None
    assert choose_layout(lone, lone.initial, mac, "auto") == "free"


def test_channel_from_pin_count_by_hand():
    d = _banks(n_per_bank=1, pins_per_macro=10)
    d.routing_layers = [("M1", "V", 0.1), ("M2", "H", 0.2), ("M3", "V", 0.25),
                        ("M4", "H", 0.4)]
    m = d.block("mem_a[0]")
    # ten pins, all on the left side (offset -w/2)
    assert side_pins(d, d.initial, np.array([m])).tolist() == [[10, 0, 0, 0]]
    # a vertical channel carries them on the vertical layers above M1: M3 only, 4 tracks/µm;
    # each side asks for twice its share, so two facing sides of p and q pins get
    # max(2p, 2q) / 4 >= (p + q) / 4 µm
    need = pin_channel(d, np.array([10, 0, 0, 0]))
    assert need.tolist() == pytest.approx([2 * 10 / 4.0, 0.0, 0.0, 0.0])
    plan = ArrayPlan.build(d, d.initial, [np.array([m])], spacing=1.0)
    assert plan.design.halo[0].tolist() == pytest.approx([5.0, 2.0, 2.0, 2.0])
