"""Design-level checks that every input path shares (JSON file, DEF text, Session edits):
fences that overlap, regions and blockages outside the die, a halo on a standard cell.  The
region overlap test is one plane sweep (Shamos, Hoey, FOCS 1976), checked here against
shapely's pairwise intersections (a reference library) and on a region of 20,000 rectangles."""

from __future__ import annotations

import json
import tracemalloc
from pathlib import Path

import numpy as np
import pytest
import shapely

import floorwidget as fw
from floorwidget.design import CELL, CellRegions, DesignError
from floorwidget.kernels.sweep import overlapping_pair
from floorwidget.session import Session
from floorwidget.synth import rent_design

DATA = Path(__file__).parent / "data" / "lefdef"
LEFS = [DATA / "kestrel_tech.lef", DATA / "kestrel_cells.lef"]

# a small block written by hand: die 0..100 x 0..40 µm (dbu 1000), ten rows of inverters
_DEF = """VERSION 5.8 ;
DESIGN hand ;
UNITS DISTANCE MICRONS 1000 ;
DIEAREA ( 0 0 ) ( 100000 40000 ) ;
ROW r0 kcore 0 0 N DO 500 BY 10 STEP 200 2000 ;
COMPONENTS 4 ;
- a0 inv_k + PLACED ( 1000 0 ) N {halo};
- a1 inv_k + PLACED ( 2000 0 ) N ;
- b0 inv_k + PLACED ( 60000 2000 ) N ;
- b1 inv_k + PLACED ( 61000 2000 ) N ;
END COMPONENTS
{blockages}REGIONS {nreg} ;
{regions}END REGIONS
GROUPS 2 ;
- ga a0 a1 + REGION ra ;
- gb b0 b1 + REGION rb ;
END GROUPS
NETS 1 ;
- n1 ( a0 Y ) ( b0 A ) ;
END NETS
END DESIGN
"""
_RA = "- ra ( 0 0 ) ( 40000 20000 ) + TYPE FENCE ;\n"


def _def(tmp_path, rb="- rb ( 50000 0 ) ( 90000 20000 ) + TYPE FENCE ;\n", halo="",
         blockages="", extra=""):
    regions = _RA + rb + extra
    p = tmp_path / "hand.def"
    p.write_text(_DEF.format(halo=halo, blockages=blockages, nreg=regions.count("- "),
                             regions=regions))
    return p


def test_hand_written_def_reads(tmp_path):
    d = fw.load(_def(tmp_path), lef=LEFS)
    assert d.regions.names == ("ra", "rb") and (d.regions.kind == 0).all()


@pytest.mark.parametrize("rb, extra, match", [
    # two fences overlapping
    ("- rb ( 30000 10000 ) ( 90000 20000 ) + TYPE FENCE ;\n", "",
     r"fences '(ra|rb)' and '(ra|rb)' overlap"),
    # the same fence twice (under another name)
    ("- rb ( 0 0 ) ( 40000 20000 ) + TYPE FENCE ;\n", "", r"fences '(ra|rb)' and '(ra|rb)'"),
    # a fence's second rectangle over another fence
    ("- rb ( 50000 0 ) ( 90000 20000 ) ( 10000 30000 ) ( 30000 40000 ) ( 35000 15000 ) "
     "( 45000 25000 ) + TYPE FENCE ;\n", "", r"fences '(ra|rb)' and '(ra|rb)' overlap"),
    # a region reaching outside the die
    ("- rb ( 50000 0 ) ( 120000 20000 ) + TYPE FENCE ;\n", "",
     r"region 'rb': rectangle .* reaches outside the die"),
])
def test_def_regions_refused_with_both_names(tmp_path, rb, extra, match):
    p = _def(tmp_path, rb=rb, extra=extra)
    with pytest.raises(DesignError, match=match) as e:
        fw.load(p, lef=LEFS)
    msg = str(e.value)
    assert "\n" not in msg and msg.startswith(str(p))


def test_def_same_region_name_twice_is_refused(tmp_path):
    p = _def(tmp_path, extra="- ra ( 60000 30000 ) ( 70000 40000 ) + TYPE FENCE ;\n")
    with pytest.raises(DesignError, match="'ra'") as e:
        fw.load(p, lef=LEFS)
    assert str(e.value).startswith(str(p))


def test_guide_may_overlap_a_fence(tmp_path):
    d = fw.load(_def(tmp_path, rb="- rb ( 30000 0 ) ( 60000 20000 ) + TYPE GUIDE ;\n"),
                lef=LEFS)
    assert d.regions.kind.tolist() == [0, 1]


def test_def_blockage_outside_the_die_and_halo_on_a_cell(tmp_path):
    p = _def(tmp_path, blockages="BLOCKAGES 1 ;\n- PLACEMENT RECT ( 90000 30000 ) "
                                  "( 110000 50000 ) ;\nEND BLOCKAGES\n")
    with pytest.raises(DesignError, match=r"placement blockage 0 .* reaches outside the die"):
        fw.load(p, lef=LEFS)
    p = _def(tmp_path, halo="+ HALO 1000 1000 1000 1000 ")
    # the DEF reader refuses it first, at its line (the design check stands behind it)
    with pytest.raises(DesignError, match=r"component 'a0': \+ HALO on a standard cell") as e:
        fw.load(p, lef=LEFS)
    assert str(e.value).startswith(f"{p}:")


# ---------------------------------------------------------------------------------------------
# JSON and Session


@pytest.fixture(scope="module")
def small():
    d = rent_design(200, seed=2, num_macros=1, macro_area=0.1)
    c = d.core
    w, h = c[2] - c[0], c[3] - c[1]
    return d, [c[0], c[1], c[0] + w / 3, c[1] + h / 3], [c[0] + w / 4, c[1] + h / 4,
                                                         c[0] + w / 2, c[1] + h / 2]


def test_cli_fence_too_small_names_the_file_and_the_fence(tmp_path, capsys):
    # a fence of 0.4 x 2 µm for two 0.6 µm inverters: refused at place time; the CLI line
    # names the input file and the fence, exits 2 and writes nothing
    from floorwidget.cli import main

    p = _def(tmp_path)
    p.write_text(p.read_text().replace("- ra ( 0 0 ) ( 40000 20000 )", "- ra ( 0 0 ) ( 400 2000 )"))
    out = tmp_path / "out.def"
    args = ["place", str(p), "-o", str(out)] + [a for lef in LEFS for a in ("--lef", str(lef))]
    assert main(args) == 2
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and err.startswith(f"floorwidget: error: {p}: ") and "'ra'" in err
    assert not out.exists()


def test_whole_core_blockage_reads_in_areas(small):
    # a blockage over the whole core leaves no free area: the figure is 0 µm², not a
    # percentage of nothing (it read "movable area is 53981135036813248.0 %")
    d, _, _ = small
    s = Session(d)
    s.add_blockage(d.core)
    fp = s.floorplan
    with pytest.raises(DesignError, match=r"movable blocks need [0-9.e+]+ µm² but the core "
                                          r"of [0-9.e+]+ µm² has 0 µm² left free") as e:
        s.place()
    assert "%" not in str(e.value) and s.floorplan is fp


def test_json_overlapping_fences_are_refused(small, tmp_path):
    d, a, b = small
    s = Session(d)
    s.add_region("f1", a)
    p = tmp_path / "f.json"
    fw.save(s.design, s.floorplan, p)
    doc = json.loads(p.read_text())
    doc["regions"].append({"name": "f2", "type": "fence", "rects": [b], "members": []})
    p.write_text(json.dumps(doc))
    with pytest.raises(DesignError, match="fences 'f1' and 'f2' overlap") as e:
        fw.load(p)
    assert str(e.value).startswith(str(p)) and "\n" not in str(e.value)
    doc["regions"][1]["rects"] = [[-5.0, 0.0, 1.0, 1.0]]
    p.write_text(json.dumps(doc))
    with pytest.raises(DesignError, match="region 'f2': rectangle .* outside the die"):
        fw.load(p)
    doc["regions"].pop()
    doc["blocks"][[b["kind"] for b in doc["blocks"]].index("cell")]["halo"] = [1, 1, 1, 1]
    p.write_text(json.dumps(doc))
    with pytest.raises(DesignError, match="on a standard cell"):
        fw.load(p)


def test_session_add_region_over_a_fence_changes_nothing(small):
    d, a, b = small
    s = Session(d)
    s.add_region("f1", a)
    before, log = s.design, s.log
    with pytest.raises(DesignError, match="fences 'f1' and 'f2' overlap"):
        s.add_region("f2", b)
    assert s.design is before and s.log == log
    s.add_region("g2", b, kind="guide")  # a guide may lie over a fence
    assert s.design.regions.names == ("f1", "g2")


def test_derive_refuses_a_halo_on_a_cell_and_a_blockage_outside(small):
    d, a, _ = small
    i = int(np.flatnonzero(d.kind == CELL)[0])
    halo = d.halo.copy()
    halo[i] = 1.0
    with pytest.raises(DesignError, match=f"block '{d.names[i]}': halo"):
        d.derive(halo=halo)
    die = d.die
    with pytest.raises(DesignError, match="blockage 0 .* outside the die"):
        d.derive(blockages=[[die[0] - 1, die[1], die[0] + 1, die[1] + 1]])
    assert d.derive(blockages=[die]).blockages.shape == (1, 4)  # the whole die is inside


# ---------------------------------------------------------------------------------------------
# the sweep against shapely, and a region of 20,000 rectangles


@pytest.mark.parametrize("seed", range(40))
def test_overlap_sweep_matches_shapely(seed):
    rng = np.random.default_rng(seed)
    n = int(rng.integers(2, 40))
    lo = rng.integers(0, 30 + 10 * seed, (n, 2)).astype(float)  # sparser with the seed
    r = np.concatenate([lo, lo + rng.integers(1, 6, (n, 2))], axis=1)
    g = rng.integers(0, 3, n)
    boxes = shapely.box(r[:, 0], r[:, 1], r[:, 2], r[:, 3])
    i, j = np.triu_indices(n, 1)
    shares = (shapely.area(shapely.intersection(boxes[i], boxes[j])) > 0) & (g[i] == g[j])
    got = overlapping_pair(r, g)
    assert (got is None) == (not shares.any())
    if got is not None:
        a, b = got
        assert g[a] == g[b] and shapely.area(shapely.intersection(boxes[a], boxes[b])) > 0


def _strips(n: int, die: np.ndarray) -> np.ndarray:
    """``n`` stacked strips across the die (each overlaps every other in x, none in y)."""
    y = np.linspace(die[1], die[3], n + 1)
    return np.stack([np.full(n, die[0]), y[:-1], np.full(n, die[2]), y[1:]], axis=1)


def test_region_of_20000_rectangles_validates_in_little_memory(small):
    d, _, _ = small
    strips = _strips(20_000, d.die)
    tracemalloc.start()
    try:
        reg = CellRegions.build(d.num_blocks, [{"name": "big", "type": "fence",
                                                "rects": strips}])
        assert reg.problems(d) == []
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < 64 << 20  # an all-pairs check would need 20,000^2 / 2 pairs: gigabytes
    strips[12_345, 3] += 1e-3  # now one strip reaches into the next
    reg = CellRegions.build(d.num_blocks, [{"name": "big", "type": "fence", "rects": strips}])
    probs = reg.problems(d)
    assert len(probs) == 1 and "region 'big': its rectangles overlap" in probs[0][1]
