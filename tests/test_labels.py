"""Display labels for long hierarchical macro names (``style.short_labels``).

The requirement is a property, checked on hypothesis-generated name sets built from a few
shared components (so that prefixes and leaves collide often): labels are pairwise different,
never longer than the name, keep the leaf of a hierarchical name, and leave short names alone.
"""

from __future__ import annotations

import re

from hypothesis import given, settings
from hypothesis import strategies as st

from floorwidget.style import short_labels

_COMP = st.sampled_from(["top", "u_core", "i_cache_subsystem", "bank0", "bank1", "sram_256x64",
                         "mem", "a", "x" * 30, "data_array_gen[3]"])
_NAME = st.builds(lambda comps, seps: "".join(c + s for c, s in zip(comps, seps))[:-1],
                  st.lists(_COMP, min_size=1, max_size=7),
                  st.lists(st.sampled_from(["/", ".", "|"]), min_size=7, max_size=7))


@settings(max_examples=300, deadline=None)
@given(names=st.lists(_NAME, min_size=1, max_size=40, unique=True),
       max_len=st.integers(8, 40))
def test_labels_are_unique_short_and_keep_the_leaf(names, max_len):
    labels = short_labels(names, max_len=max_len)
    assert len(labels) == len(names)
    assert len(set(labels)) == len(labels)
    for nm, lab in zip(names, labels):
        assert len(lab) <= len(nm)
        if len(nm) <= max_len:
            assert lab == nm
        comps = re.split(r"[/|.]", nm)
        if len(comps) > 1:
            assert lab.endswith(comps[-1])


def test_hand_worked_labels():
    names = ["ariane/i_cache_subsystem/i_icache/sram_block_0/tag_sram/macro_mem",
             "ariane/i_cache_subsystem/i_icache/sram_block_1/tag_sram/macro_mem",
             "ariane/i_cache_subsystem/i_icache/sram_block_1/data_sram/macro_mem",
             "pll"]
    assert short_labels(names) == ["ariane/\u2026/sram_block_0/tag_sram/macro_mem",
                                   "ariane/\u2026/sram_block_1/tag_sram/macro_mem",
                                   "ariane/\u2026/data_sram/macro_mem", "pll"]
    # names that differ far from the leaf keep that component, not the whole path
    assert short_labels(["soc/cpu_cluster/core0/l2/data_bank_3",
                         "soc/dsp/core0/l2/data_bank_3"]) == [
        "soc/cpu_cluster/\u2026/data_bank_3", "soc/dsp/\u2026/data_bank_3"]
