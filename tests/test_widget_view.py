"""Headless tests of seeing the design in the widget: find by name, colours by hierarchy group
and their legend, the logic picture, flylines of a macro or a group (direct and through one
cell), and readability on the 146k-component ariane136 block.

References: a hand-made design whose groups, nets and bundles are worked out by hand below;
the logic picture is decoded by matplotlib's PNG reader (not by our encoder); a plain Python
walk over the nets for the demo's group bundles.
"""

from __future__ import annotations

import io

import numpy as np
import pytest

pytest.importorskip("bqplot")

from floorwidget import style  # noqa: E402
from floorwidget.design import CELL, CLUSTER, MACRO, TERMINAL, Design  # noqa: E402
from floorwidget.widget import FloorplanWidget  # noqa: E402
from floorwidget.widget import geometry as geo  # noqa: E402


@pytest.fixture(scope="module")
def hand():
    """Two macros, six cells of group ``a`` (lower left), three of ``b`` (lower middle), three
    terminals; nets chosen so the bundles can be counted by hand."""
    names = ["top/ram0", "blk/ram1"] + [f"a/c{k}" for k in range(6)] \
        + [f"b/c{k}" for k in range(3)] + ["d[0]", "d[1]", "clk"]
    kind = [MACRO] * 2 + [CELL] * 9 + [TERMINAL] * 3
    w = [20.0, 20.0] + [4.0] * 9 + [1.0] * 3
    x = [70.0, 70.0] + [2.0 + 5 * k for k in range(6)] + [42.0, 48.0, 54.0] + [0.0, 0.0, 99.0]
    y = [70.0, 10.0] + [10.0] * 6 + [10.0] * 3 + [40.0, 60.0, 50.0]
    ix = {nm: i for i, nm in enumerate(names)}
    nets = [["top/ram0", "a/c0"],              # n0
            ["a/c0", "d[0]"],                  # n1
            ["top/ram0", "blk/ram1"],          # n2
            ["top/ram0", "b/c0", "b/c1"],      # n3
            ["b/c1", "d[1]"],                  # n4
            ["a/c1", "clk"],                   # n5
            ["a/c0", "blk/ram1"]]              # n6
    start = np.cumsum([0] + [len(n) for n in nets])
    pins = [ix[b] for n in nets for b in n]
    d = Design("hand", [0, 0, 100, 100], names, kind, w, w, start, pins,
               np.zeros(len(pins)), np.zeros(len(pins)), x=x, y=y,
               status=[0, 0] + [0] * 9 + [2] * 3)
    return d


@pytest.fixture
def hw(hand):
    return FloorplanWidget(hand, size=400, live=False)


def _bundles(c, through=False):
    tg, cnt, _, _ = c.bundle_data(through)
    return {c.target_label(t): k for t, k in zip(tg.tolist(), cnt.tolist())}


def test_flylines_of_a_macro_and_of_a_group(hw):
    c = hw.canvas
    hw.select(["top/ram0"])
    # direct: n0 to a's logic, n2 to ram1, n3 to b's logic (two cells, one net)
    assert _bundles(c) == {"logic of a": 1, "blk/ram1": 1, "logic of b": 1}
    assert not c.marks["flylines_through"].visible
    hw.toggles["Through one cell"].value = True
    # through a/c0, b/c0, b/c1: n1 and n4 reach bus d, n6 reaches ram1
    assert _bundles(c, True) == {"I/O d": 2, "blk/ram1": 1}
    assert c.marks["flylines_through"].visible
    assert np.asarray(c.marks["flylines_through"].x).reshape(-1, 5).shape[0] == 2
    assert "I/O d (2)" in hw.details.html.value
    # the group's logic as the source: n0, n1, n5, n6
    hw.show_group("a")
    assert c.focus_group is not None and hw.selection == []
    assert _bundles(c) == {"top/ram0": 1, "I/O d": 1, "I/O clk": 1, "blk/ram1": 1}
    assert "group a" in hw.details.html.value
    # a bundle ends in the middle of the blocks it reaches, and starts at the group's middle
    xs = np.asarray(c.marks["flylines"].x).reshape(-1, 5)
    cx, cy = hw.floorplan.centres()
    src = c.groups.members(c.focus_group)
    assert np.allclose((xs[:, 0] + xs[:, 3]) / 2, cx[src].mean())
    with pytest.raises(KeyError, match="no hierarchy group"):
        hw.show_group("nope")
    hw.show_group("top")  # a group with a macro selects it
    assert hw.selection == ["top/ram0"]
    # dropping it ends the group view: the flylines come from the dropped macro again
    cx, cy = hw.floorplan.centres()
    hw.drop(0, cx[0] - 10.0, cy[0])
    assert c.focus_group is None and hw.selection == ["top/ram0"]


def test_colours_by_group_legend_and_logic_picture(hw, hand):
    import matplotlib.image as mpimg

    c = hw.canvas
    hw.toggles["Colour by group"].value = True
    # area ranks the groups: top, blk (400 µm² each), a (96), b (48), the terminals' top level
    pal = style.GROUP_PALETTE
    assert c.marks["macros"].fill_colors == [pal[0], pal[1]]
    legend = hw.view.group_legend.value
    for label, colour in (("top", pal[0]), ("blk", pal[1]), ("a", pal[2]), ("b", pal[3])):
        assert f'fill="{colour}"' in legend and f"> {label} —" in legend
    assert "more groups" not in legend  # five groups, seven colours
    assert not c.marks["cells"].visible and c.marks["groups"].visible
    img = mpimg.imread(io.BytesIO(c.marks["groups"].image.value), format="png")
    g = c.grid
    assert img.shape == (g.ny, g.nx, 4)

    def pixel(x, y):
        i = int((x - g.xlo) // g.bw)
        j = g.ny - 1 - int((y - g.ylo) // g.bh)  # the top row first
        return img[j, i]

    def rgb(colour):
        return np.array([int(colour[k:k + 2], 16) / 255 for k in (1, 3, 5)])

    for x, colour in ((4.0, pal[2]), (44.0, pal[3])):  # inside a cell of a, of b
        p = pixel(x, 12.0)
        assert np.allclose(p[:3], rgb(colour), atol=1 / 255) and p[3] > 0.5
    assert pixel(90.0, 40.0)[3] == 0  # no logic there
    # focus on b: a's logic fades to a faint grey, b keeps its colour; the picture is a new
    # image widget (the browser redraws on a new one, not on new bytes in the old one)
    before = c.marks["groups"].image
    hw.show_group("b")
    assert c.marks["groups"].image is not before
    img = mpimg.imread(io.BytesIO(c.marks["groups"].image.value), format="png")
    pa, pb = pixel(4.0, 12.0), pixel(44.0, 12.0)
    assert np.allclose(pb[:3], rgb(pal[3]), atol=1 / 255)
    assert np.allclose(pa[:3], rgb(style.OTHER_GROUP), atol=1 / 255) and pa[3] < pb[3]
    # back to status colours
    hw.toggles["Colour by group"].value = False
    assert c.marks["macros"].fill_colors[0] == c.status_style["movable"]["fill"]
    assert c.marks["cells"].visible and not c.marks["groups"].visible


def test_grey_past_the_palette_is_in_the_legend(demo_design):
    w = FloorplanWidget(demo_design, size=300, live=False)
    w.colour_by_groups(True, depth=2, separators="/._")
    c = w.canvas
    n = len(c.groups)
    assert n > len(style.GROUP_PALETTE)
    listed = sorted(g for _, mem in c.group_legend for g in mem)
    assert listed == list(range(n))
    grey = n - len(style.GROUP_PALETTE)
    assert f"{grey} more groups, all grey" in w.view.group_legend.value
    fills = set(c.marks["macros"].fill_colors)
    assert fills <= set(style.GROUP_PALETTE) | {style.OTHER_GROUP}
    assert w.view.group_depth.value == 2 and w.view.group_seps.value == "/._"
    # typing a depth in the panel regroups: depth 0 is one group, the top level
    w.view.group_depth.value = 0
    assert len(w.canvas.groups) == 1 and w.view.group_pick.options[0][0].startswith("(top level)")
    assert "more groups" not in w.view.group_legend.value


def test_find_by_name(hw, hand):
    c = hw.canvas
    # exact: selected, view centred on it
    assert hw.find("top/ram0") == ["top/ram0"]
    assert hw.selection == ["top/ram0"]
    assert (c.x_scale.min + c.x_scale.max) / 2 == pytest.approx(80.0)
    assert (c.y_scale.min + c.y_scale.max) / 2 == pytest.approx(80.0)
    assert c.x_scale.max - c.x_scale.min < c.home[1] - c.home[0]  # zoomed in
    assert "Found top/ram0." in hw.message.value
    # partial, one match: a cell is ringed, not selected
    assert hw.find("A/C5") == ["a/c5"]
    assert hw.selection == [] and c.found.tolist() == [hand.block("a/c5")]
    assert "the only name" in hw.message.value
    # ambiguous: every match shown, the macros selected, the view holds them all
    assert hw.find("ram") == ["top/ram0", "blk/ram1"]
    assert sorted(hw.selection) == ["blk/ram1", "top/ram0"]
    assert c.y_scale.min <= 10.0 and c.y_scale.max >= 90.0
    assert "2 blocks match" in hw.message.value
    # missing: a clear message, nothing else changes
    view = (c.x_scale.min, c.x_scale.max)
    assert hw.find("sram") == []
    assert "No block name contains" in hw.message.value and "D55E00" in hw.message.value
    assert sorted(hw.selection) == ["blk/ram1", "top/ram0"]
    assert (c.x_scale.min, c.x_scale.max) == view and c.found.size == 0
    # the panel's text box and button do the same
    hw.view.find_text.value = "blk/ram1"
    hw.buttons["Find"].click()
    assert hw.selection == ["blk/ram1"]
    hw.view.find_text.value = " "
    hw.buttons["Find"].click()
    assert "Type a block name" in hw.message.value and c.found.size == 0


def test_png_decodes_to_the_same_pixels():
    import matplotlib.image as mpimg

    rng = np.random.default_rng(0)
    a = rng.integers(0, 256, (5, 7, 4), dtype=np.uint8)
    img = mpimg.imread(io.BytesIO(geo.png_rgba(a)), format="png")
    assert np.array_equal(np.round(img * 255).astype(np.uint8), a)


@pytest.mark.slow
def test_readable_on_ariane136(ariane136):
    """146k components: every view action keeps each mark to a few thousand elements."""
    d = ariane136
    w = FloorplanWidget(d, size=400, live=False)
    w.colour_by_groups(True, depth=2, separators="/._")
    assert "more groups, all grey" in w.view.group_legend.value
    found = w.find("data_sram_macro_mem")
    assert len(found) > 1 and len(w.selection) == sum(d.kind[d.block(n)] == MACRO
                                                      for n in found)
    w.show_group("ex_stage")
    w.toggles["Through one cell"].value = True
    counts = w.canvas.element_counts()
    assert max(counts.values()) <= 5000, counts
    assert counts["flylines"] > 0 and counts["macros"] == 136


def test_through_bundles_match_a_walk_over_the_nets(demo_design):
    """The second ring on the demo against a plain Python walk over every net."""
    d = demo_design
    w = FloorplanWidget(d, size=300, live=False)
    c = w.canvas
    i = d.block("sram_sp4k_0")
    w.select([i])
    w.toggles["Through one cell"].value = True
    pins = [set(d.pin_block[d.net_start[n]:d.net_start[n + 1]].tolist())
            for n in range(d.num_nets)]
    small = [d.net_start[n + 1] - d.net_start[n] <= 64 for n in range(d.num_nets)]
    first = {n for n in range(d.num_nets) if small[n] and i in pins[n]}
    mid = {b for n in first for b in pins[n] if b != i and d.kind[b] in (CELL, CLUSTER)}
    second = {n for n in range(d.num_nets) if small[n] and pins[n] & mid} - first
    def target(b):  # names cut by hand: the macro, the bus, the first level of the logic
        nm = d.names[b]
        if d.kind[b] == MACRO:
            return nm
        if d.kind[b] == TERMINAL:
            return "I/O " + nm.split("[")[0]
        return "logic of " + (nm.split("/")[0] if "/" in nm else "(top level)")

    ref: dict[str, set] = {}
    for n in second:
        for b in pins[n] - mid - {i}:
            ref.setdefault(target(b), set()).add(n)
    assert ref, "the demo macro reaches something through one cluster"
    assert _bundles(c, True) == {k: len(v) for k, v in ref.items()}
