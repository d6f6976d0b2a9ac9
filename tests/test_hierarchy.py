"""Hierarchy groups, I/O buses, search by name and group colours (floorwidget.hierarchy).

References: hand-worked names; for any names, a character-by-character scanner written here
independently of the module's regular expression (DEF escapes as in the LEF/DEF language
reference, from memory: a backslash makes the next character part of the name); the
Okabe-Ito palette (M. Okabe, K. Ito, "Color Universal Design", 2008, from memory).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from floorwidget import style
from floorwidget.hierarchy import (
    TOP,
    bus_groups,
    find_blocks,
    found_message,
    group_colours,
    hierarchy_groups,
)

NAMES = [
    "top/cpu/alu/u1",
    "top/cpu/alu/u2",
    "top/cpu/u3",
    r"top/mem\[0\].bank/u4",
    "u5",
    r"top.dsp.x\/y",
    r"top/mem\[1\].bank/u6",
]


@pytest.mark.parametrize("depth, keys", [
    (0, [""] * 7),
    (1, ["top", "top", "top", "top", "", "top", "top"]),
    (2, ["top/cpu", "top/cpu", "top/cpu", r"top/mem\[0\]", "", "top.dsp", r"top/mem\[1\]"]),
    (3, ["top/cpu/alu", "top/cpu/alu", "top/cpu", r"top/mem\[0\].bank", "", "top.dsp",
         r"top/mem\[1\].bank"]),
    (9, ["top/cpu/alu", "top/cpu/alu", "top/cpu", r"top/mem\[0\].bank", "", "top.dsp",
         r"top/mem\[1\].bank"]),
])
def test_groups_of_hand_worked_names(depth, keys):
    g = hierarchy_groups(NAMES, depth)
    assert [g.keys[k] for k in g.index] == keys
    # numbered in order of first appearance, one number per distinct key
    first = list(dict.fromkeys(keys))
    assert g.keys == first
    assert g.index.tolist() == [first.index(k) for k in keys]
    assert g.sizes.sum() == len(NAMES)
    assert g.label(g.index[4]) == TOP  # a name without hierarchy is at the top level


def test_other_separators_and_bad_arguments():
    # flattened names: an underscore as a separator too
    g = hierarchy_groups(["ex_stage_i_mult_g1", "ex_stage_i_div_g2", "g3"], 2, "/._")
    assert [g.keys[k] for k in g.index] == ["ex_stage", "ex_stage", ""]
    assert g.members(0).tolist() == [0, 1]
    for bad in (-1, 1.5, True):
        with pytest.raises(ValueError, match="depth"):
            hierarchy_groups(NAMES, bad)
    with pytest.raises(ValueError, match="separators"):
        hierarchy_groups(NAMES, 1, "\\")


def _scan(name: str, depth: int, seps: str) -> str:
    """Reference: walk the characters, honouring backslash escapes."""
    comps, cur, joins, i = [], "", [], 0
    while i < len(name):
        ch = name[i]
        if ch == "\\" and i + 1 < len(name):
            cur += name[i:i + 2]
            i += 2
            continue
        if ch in seps:
            comps.append(cur)
            joins.append(ch)
            cur = ""
        else:
            cur += ch
        i += 1
    k = min(depth, len(comps))  # the last component (the leaf) never counts
    out = ""
    for j in range(k):
        out += comps[j] + (joins[j] if j < k - 1 else "")
    return out


@settings(max_examples=200, deadline=None)
@given(st.lists(st.text(alphabet="ab/._\\[]0", max_size=12), max_size=20),
       st.integers(0, 4), st.sampled_from(["/.", "/._", "/"]))
def test_groups_match_a_character_scanner(names, depth, seps):
    g = hierarchy_groups(names, depth, seps)
    got = [g.keys[k] for k in g.index]
    assert got == [_scan(nm, depth, seps) for nm in names]
    # same key <=> same group
    assert len(set(g.keys)) == len(g.keys)


def test_bus_groups():
    g = bus_groups(["d[0]", "d[1]", "clk", r"q\[2\]", "q[3]", "a<4>", "a<5>", "[7]"])
    assert [g.keys[k] for k in g.index] == ["d", "d", "clk", "q", "q", "a", "a", "[7]"]


NAMES_FIND = ["ram_1", "ram_10", r"cache/block\[0\].ram", "CPU/alu", "io_pad"]


def test_find_exact_partial_ambiguous_missing():
    # exact wins even when other names contain it
    found, exact = find_blocks(NAMES_FIND, "ram_1")
    assert exact and found.tolist() == [0]
    assert found_message(NAMES_FIND, "ram_1", found, exact) == "Found ram_1."
    # one partial match, letter case and DEF escapes ignored
    found, exact = find_blocks(NAMES_FIND, "cpu/AL")
    assert not exact and found.tolist() == [3]
    assert "the only name" in found_message(NAMES_FIND, "cpu/AL", found, exact)
    found, _ = find_blocks(NAMES_FIND, "block[0]")
    assert found.tolist() == [2]
    # ambiguous: every match, in input order, and a message that says how many
    found, exact = find_blocks(NAMES_FIND, "ram")
    assert not exact and found.tolist() == [0, 1, 2]
    msg = found_message(NAMES_FIND, "ram", found, exact, show=2)
    assert msg.startswith("3 blocks match 'ram'") and "and 1 more" in msg
    # missing
    found, exact = find_blocks(NAMES_FIND, "  sram ")
    assert found.size == 0 and not exact
    assert found_message(NAMES_FIND, "sram", found, exact).startswith("No block name contains")
    with pytest.raises(ValueError, match="Type a block name"):
        find_blocks(NAMES_FIND, "   ")


@pytest.mark.parametrize("k", [1, 3, 7, 8, 30])
def test_colour_legend_maps_every_group(k):
    rng = np.random.default_rng(k)
    w = rng.integers(0, 5, k).astype(float)  # ties on purpose
    pal = style.GROUP_PALETTE
    colours, legend = group_colours(w, pal, style.OTHER_GROUP)
    listed = [g for _, members in legend for g in members]
    assert sorted(listed) == list(range(k))  # every group exactly once
    for colour, members in legend:
        assert all(colours[g] == colour for g in members)
    coloured = [g for g in range(k) if colours[g] != style.OTHER_GROUP]
    assert len(coloured) == min(k, len(pal)) == len(set(colours[g] for g in coloured))
    # the heaviest groups get the palette (ties in group order), the rest share the grey
    order = sorted(range(k), key=lambda g: (-w[g], g))
    assert set(coloured) == set(order[:len(pal)])
    assert (len(legend) == len(pal) + 1) == (k > len(pal))


def test_group_palette_is_okabe_ito_without_black():
    pal = style.GROUP_PALETTE
    assert len(set(pal)) == len(pal) == 7
    assert set(pal) == set(style.OKABE_ITO.values()) - {style.BLACK}
    assert style.OTHER_GROUP not in style.OKABE_ITO.values()


def test_render_colours_by_group(tmp_path):
    pytest.importorskip("matplotlib")
    import xml.etree.ElementTree as ET

    from floorwidget.design import CELL, MACRO, Design, DesignError
    from floorwidget.render import render

    names = ["top/ram0", "blk/ram1", "a/c0", "a/c1", "b/c0"]
    d = Design("hand", [0, 0, 100, 100], names, [MACRO, MACRO, CELL, CELL, CELL],
               [20, 20, 4, 4, 4], [20, 20, 4, 4, 4], [0, 2, 4], [0, 2, 1, 4],
               np.zeros(4), np.zeros(4), x=[70, 70, 5, 12, 40], y=[70, 10, 10, 10, 10])
    out = tmp_path / "groups.svg"
    fig = render(d, None, out, hierarchy=1)
    root = ET.parse(out).getroot()
    fills = {}
    for el in root.iter():
        if (el.get("id") or "").startswith("macro:"):
            path = next(el.iter("{http://www.w3.org/2000/svg}path"))
            fills[el.get("id")[6:]] = path.get("style").split("fill: ")[1][:7].upper()
    # equal macro areas: the groups in order of appearance get the first two colours
    assert fills == {"top/ram0": style.GROUP_PALETTE[0], "blk/ram1": style.GROUP_PALETTE[1]}
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert {"group top", "group blk", "group a", "group b"} <= set(labels)
    with pytest.raises(DesignError, match="depth"):
        render(d, None, tmp_path / "bad.svg", hierarchy=-1)
    assert not (tmp_path / "bad.svg").exists()
