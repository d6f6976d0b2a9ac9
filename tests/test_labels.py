"""Macro labels: the distinguishing part of long names, fitted inside the macros, never two
overlapping (``style.short_labels``, ``style.place_labels``, ``render``).

The requirements are properties, checked on hypothesis-generated name sets built from a few
shared components (so that prefixes and leaves collide often) and on random boxes; overlap is
checked by brute force, and on ariane136 against the text extents matplotlib measures.
"""

from __future__ import annotations

import re

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from floorwidget.design import MACRO
from floorwidget.style import place_labels, short_labels

_COMP = st.sampled_from(["top", "u_core", "i_cache_subsystem", "bank0", "bank1", "sram_256x64",
                         "mem", "a", "x" * 30, r"data_array_gen\[3\]"])
_NAME = st.builds(lambda comps, seps: "".join(c + s for c, s in zip(comps, seps))[:-1],
                  st.lists(_COMP, min_size=1, max_size=7),
                  st.lists(st.sampled_from(["/", ".", "|", "_"]), min_size=7, max_size=7))


def _tokens(s: str) -> list[str]:
    return [t for t in re.split(r"[/|._]", s.replace("\\", "")) if t]


def _is_subsequence(small: list[str], big: list[str]) -> bool:
    it = iter(big)
    return all(any(t == b for b in it) for t in small)


@settings(max_examples=300, deadline=None)
@given(names=st.lists(_NAME, min_size=1, max_size=40, unique=True),
       max_len=st.integers(8, 40))
def test_labels_are_unique_short_and_made_of_the_name(names, max_len):
    labels = short_labels(names, max_len=max_len)
    assert len(labels) == len(names)
    assert len(set(labels)) == len(labels)
    for nm, lab in zip(names, labels):
        plain = nm.replace("\\", "")
        assert len(lab) <= len(plain)
        if len(plain) <= max_len:
            assert lab == plain
        assert _is_subsequence(_tokens(lab), _tokens(nm))


def test_hand_worked_labels():
    # flattened hierarchy (as in ariane136): the shared prefix and the common leaf drop out
    names = [r"i_cache_subsystem_i_icache_sram_block\[0\].data_sram_macro_mem\[0\].i_ram",
             r"i_cache_subsystem_i_icache_sram_block\[0\].tag_sram_macro_mem\[0\].i_ram",
             r"i_cache_subsystem_i_icache_sram_block\[1\].data_sram_macro_mem\[0\].i_ram",
             r"i_cache_subsystem_i_nbdcache_valid_dirty_sram_macro_mem\[0\].i_ram",
             "pll"]
    assert short_labels(names[:4]) == ["icache_block[0].data", "icache_block[0].tag",
                                       "icache_block[1]", "nbdcache"]
    # with "pll" beside them the first token is where the names branch, so it stays
    assert short_labels(names) == ["i_icache_block[0].data", "i_icache_block[0].tag",
                                   "i_icache_block[1]", "i_nbdcache", "pll"]
    # names that differ far from the leaf keep that component and the one that differs
    assert short_labels(["soc/cpu_cluster/core0/l2/data_bank_3",
                         "soc/dsp/core0/l2/data_bank_3"], 8) == ["cpu", "dsp"]


def _brute_overlaps(e: np.ndarray) -> int:
    ox = np.minimum(e[:, None, 2], e[None, :, 2]) - np.maximum(e[:, None, 0], e[None, :, 0])
    oy = np.minimum(e[:, None, 3], e[None, :, 3]) - np.maximum(e[:, None, 1], e[None, :, 1])
    return int(np.triu((ox > 0) & (oy > 0), 1).sum())


@settings(max_examples=200, deadline=None)
@given(seed=st.integers(0, 2**31 - 1), n=st.integers(1, 60), lines=st.integers(1, 4),
       keep_out=st.sampled_from([0.0, 7.0]))
def test_placed_labels_fit_and_never_overlap(seed, n, lines, keep_out):
    # boxes that overlap each other often (an illegal floorplan), names of various lengths
    rng = np.random.default_rng(seed)
    x, y = rng.uniform(0, 300, n), rng.uniform(0, 300, n)
    boxes = np.stack([x, y, x + rng.uniform(5, 120, n), y + rng.uniform(5, 120, n)], 1)
    texts = ["_".join("ab"[: rng.integers(1, 3)] * rng.integers(1, 4)
                      for _ in range(rng.integers(1, 5))) for _ in range(n)]
    keep, got, scale, ext = place_labels(texts, boxes, 6.0, 12.0, max_lines=lines, pad=1.0,
                                         scales=(1.0, 0.7), keep_out=keep_out)
    k = np.flatnonzero(keep)
    assert _brute_overlaps(ext[k]) == 0
    # above the band left free across the centre (a handle there)
    assert np.all(ext[k, 1] >= (boxes[k, 1] + boxes[k, 3]) / 2 + keep_out - 1e-9) or not keep_out
    assert np.all(ext[k, :2] >= boxes[k, :2] + 1.0 - 1e-9)
    assert np.all(ext[k, 2:] <= boxes[k, 2:] - 1.0 + 1e-9)
    for i in k:  # the lines are the label, cut after separators, within the line limit
        assert "".join(got[i]) == texts[i] and 1 <= len(got[i]) <= lines
        assert scale[i] in (1.0, 0.7)
    # a lone box wide enough always gets its label
    one = place_labels(["abc"], [[0, 0, 100, 100]], 6.0, 12.0)
    assert one[0].tolist() == [True] and one[1] == [["abc"]]


@pytest.mark.slow
def test_render_labels_on_ariane136_fit_and_never_overlap(ariane136):
    # measured by matplotlib's own renderer (the text extents it draws), not our estimate
    from floorwidget.kernels.rects import overlap_pairs
    from floorwidget.render import render

    d = ariane136
    rects = d.initial.rects()
    for size in (11.0, 30.0):  # the default picture (names do not fit) and a large one
        fig = render(d, d.initial, figsize=(size, size))
        ax = fig.axes[0]
        texts = [t for t in ax.texts if (t.get_gid() or "").startswith("label:")]
        r = fig.canvas.get_renderer()
        ext = np.array([t.get_window_extent(r).extents for t in texts]).reshape(-1, 4)
        assert len(overlap_pairs(ext)[0]) == 0
        for t, e in zip(texts, ext):
            i = d.block(t.get_gid()[len("label:"):])
            assert d.kind[i] == MACRO
            lo, hi = ax.transData.transform(rects[i, :2]), ax.transData.transform(rects[i, 2:])
            assert lo[0] <= e[0] and e[2] <= hi[0] and lo[1] <= e[1] and e[3] <= hi[1]
    assert len(texts) >= 40  # at 30 inches most of the 136 names fit
