"""GSRC floorplanning sets (.blocks/.hardblocks + .nets + .pl), checked on hand-worked files.

Worked by hand here: footprints are the bounding boxes of the corner lists; a soft block of area
A with aspect bounds [lo, hi] takes aspect clip(1, lo, hi), width sqrt(A / aspect); a derived
outline has area (1 + whitespace) * block area and height / width = aspect (the fixed-outline
setting of Adya, Markov, IEEE TVLSI 2003).  The public suites are checked against the counts
their README states.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import floorwidget as fw
from floorwidget.design import FIXED, MACRO, MOVABLE, TERMINAL, DesignError

REAL = Path(__file__).resolve().parents[2] / "shared" / "realdata"

BLOCKS = """UCLA blocks 1.0
# a comment
NumSoftRectangularBlocks : 1
NumHardRectilinearBlocks : 2
NumTerminals : 2

a hardrectilinear 4 (0, 0) (0, 20) (10, 20) (10, 0)
ell hardrectilinear 6 (0, 0) (0, 30) (10, 30) (10, 10) (30, 10) (30, 0)
s softrectangular 400 0.25 4.0
p1 terminal
p2 terminal
"""
NETS = """UCLA nets 1.0
NumNets : 2
NumPins : 5
NetDegree : 3 clk
a B : %50 %-100
s B
p1 B
NetDegree : 2
ell
p2 B : 1.5 -2
"""
PL = """UCLA pl 1.0
p1 0 0
p2 120 60 : N /FIXED
"""


def _write(tmp_path: Path, blocks=BLOCKS, nets=NETS, pl=PL, suffix=".blocks") -> Path:
    p = tmp_path / f"t{suffix}"
    p.write_text(blocks)
    if nets is not None:
        (tmp_path / "t.nets").write_text(nets)
    if pl is not None:
        (tmp_path / "t.pl").write_text(pl)
    return p


def test_hand_made_set_with_header(tmp_path):
    d = fw.load(_write(tmp_path))
    assert d.names == ["a", "ell", "s", "p1", "p2"]
    assert list(d.kind) == [MACRO, MACRO, MACRO, TERMINAL, TERMINAL]
    # worked: a 10 x 20; the L-shape's bounding box 30 x 30; soft 400 at aspect 1 -> 20 x 20
    assert d.width.tolist()[:3] == [10.0, 30.0, 20.0]
    assert d.height.tolist()[:3] == [20.0, 30.0, 20.0]
    assert float((d.width * d.height).sum()) == 200 + 900 + 400
    # outline: the terminals' bounding box with the origin
    assert d.die.tolist() == [0.0, 0.0, 120.0, 60.0] and d.core.tolist() == d.die.tolist()
    assert d.grid_pitch.tolist() == [1.0, 1.0] and len(d.row_x) == 0
    st = d.initial.status
    assert list(st) == [MOVABLE] * 3 + [FIXED] * 2
    assert d.initial.position("p2") == (120.0, 60.0)
    # nets: '%50 %-100' is half the half-width right, the full half-height down
    assert d.net_names == ["clk", "net1"]
    assert d.net_start.tolist() == [0, 3, 5]
    assert d.pin_dx.tolist() == [2.5, 0.0, 0.0, 0.0, 1.5]
    assert d.pin_dy.tolist() == [-10.0, 0.0, 0.0, 0.0, -2.0]
    # unplaced blocks start at the outline centre
    cx, cy = d.initial.centres()
    assert np.allclose(cx[:3], 60.0) and np.allclose(cy[:3], 30.0)


def test_soft_block_keeps_its_area_within_aspect_bounds(tmp_path):
    # aspect bounds [2, 3] exclude a square: aspect 2, width sqrt(400 / 2), height 2 x width
    blocks = "s softrectangular 400 2 3\nb hardrectilinear 4 (0,0) (0,5) (5,5) (5,0)\n"
    nets = "NetDegree : 2\ns\nb\n"
    d = fw.load(_write(tmp_path, blocks, nets, None, suffix=".hardblocks"), aspect=2.0)
    w, h = d.width[0], d.height[0]
    assert w * h == pytest.approx(400.0) and h / w == pytest.approx(2.0)


def test_derived_outline_without_terminals(tmp_path):
    # no header line, no terminals, no .pl: area (1 + 0.2) * 1500 = 1800, aspect 2 -> 30 x 60
    blocks = "\n".join(BLOCKS.splitlines()[6:9]) + "\n"
    nets = "NetDegree : 3\na\nell\ns\n"
    p = _write(tmp_path, blocks, nets, None)
    d = fw.load(p, whitespace=0.2, aspect=2.0)
    assert d.die.tolist() == pytest.approx([0.0, 0.0, 30.0, 60.0])
    # defaults 0.10 and 1.0: side sqrt(1.1 * 1500)
    d = fw.load(p)
    assert d.die[2] == pytest.approx(np.sqrt(1650.0)) and d.die[3] == pytest.approx(d.die[2])


def test_explicit_whitespace_scales_the_terminals_onto_the_outline(tmp_path):
    d = fw.load(_write(tmp_path), whitespace=0.2, aspect=0.5)
    # 1.2 * 1500 = 1800 at aspect 0.5 -> 60 x 30; the pads' box 120 x 60 scales by 1/2
    assert d.die.tolist() == pytest.approx([0.0, 0.0, 60.0, 30.0])
    assert d.initial.position("p2") == pytest.approx((60.0, 30.0))


def test_real_gsrc_sets_match_their_readme():
    # counts from ../shared/realdata/README.md: 200 / 300 hard blocks, 564 / 569 terminals;
    # nets and pins from the .nets headers; outline side = largest terminal coordinate
    cases = {"n200": (200, 564, 1585, 3599, 438.0), "n300": (300, 569, 1893, 4358, 548.0)}
    for name, (nb, nt, nn, npins, side) in cases.items():
        path = REAL / f"gsrc-{name}" / f"{name}.hardblocks"
        if not path.exists():
            pytest.skip("../shared/realdata not present")
        d = fw.load(path)
        assert len(d.macros) == nb
        assert int((d.kind == TERMINAL).sum()) == nt
        assert d.num_nets == nn and d.num_pins == npins
        assert d.die.tolist() == [0.0, 0.0, side, side]
        util = float((d.width * d.height)[d.kind == MACRO].sum()) / side ** 2
        assert 0.88 < util < 0.93  # "10 % whitespace": 1 / 1.1 = 0.909


@pytest.mark.parametrize("blocks, nets, pl, where, match", [
    (BLOCKS.replace("4 (0, 0) (0, 20)", "6 (0, 0) (0, 20)"), NETS, PL, "t.blocks:7",
     "corners"),
    (BLOCKS.replace("(10, 20) (10, 0)", "(10, 20) (11, 1)"), NETS, PL, "t.blocks:7",
     "rectilinear"),
    (BLOCKS.replace("p2 terminal", "p2 pad"), NETS, PL, "t.blocks:11", "unknown type"),
    (BLOCKS.replace("NumTerminals : 2", "NumTerminals : 3"), NETS, PL, "t.blocks:5",
     "announces 3"),
    (BLOCKS.replace("400 0.25", "-4 0.25"), NETS, PL, "t.blocks:9", "area"),
    (BLOCKS.replace("ell hard", "a hard"), NETS, PL, "t.blocks:8", "twice"),
    (BLOCKS, NETS.replace("\ns B", "\nq B"), PL, "t.nets:6", "unknown block 'q'"),
    (BLOCKS, NETS.replace("NetDegree : 2", "NetDegree : x"), PL, "t.nets:8", "number"),
    (BLOCKS, NETS.replace("NetDegree : 2\n", ""), PL, "t.nets:8", "outside a net"),
    (BLOCKS, NETS.replace("NumNets : 2", "NumNets : 3"), PL, "t.nets:2", "announces 3"),
    (BLOCKS, NETS.replace("NetDegree : 3", "NetDegree : 4"), PL, "t.nets:8", "fewer"),
    (BLOCKS, NETS.replace("%-100", "%x"), PL, "t.nets:5", "number"),
    (BLOCKS, NETS, PL.replace("p2 120 60", "p9 120 60"), "t.pl:3", "unknown block 'p9'"),
    (BLOCKS, NETS, PL.replace("p2 120 60", "p2 120"), "t.pl:3", "expected"),
    (BLOCKS, NETS, PL.replace(": N", ": Q"), "t.pl:3", "orientation"),
    (BLOCKS, NETS, PL.replace("p2 120 60 : N /FIXED\n", ""), "t.pl:", "'p2' has no position"),
])
def test_malformed_input_names_file_and_line(tmp_path, blocks, nets, pl, where, match):
    p = _write(tmp_path, blocks, nets, pl)
    with pytest.raises(DesignError, match=match) as err:
        fw.load(p)
    assert str(err.value).startswith(str(tmp_path / where))
    assert "\n" not in str(err.value)


def test_missing_companion_files(tmp_path):
    with pytest.raises(DesignError, match=r"missing t\.nets"):
        fw.load(_write(tmp_path, nets=None))
    (tmp_path / "t.nets").unlink(missing_ok=True)
    for f in tmp_path.iterdir():
        f.unlink()
    with pytest.raises(DesignError, match=r"missing t\.pl"):
        fw.load(_write(tmp_path, pl=None))


def test_options_are_refused_for_other_formats(demo_path):
    with pytest.raises(DesignError, match="GSRC"):
        fw.load(demo_path, whitespace=0.1)
    with pytest.raises(DesignError, match="whitespace"):
        fw.load("x.blocks", whitespace=-1.0)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow,
                                                                 HealthCheck.function_scoped_fixture])
@given(which=st.sampled_from(["blocks", "nets", "pl"]), pos=st.integers(0, 10_000),
       junk=st.sampled_from(["", "x", ":", "(", ")", "%", "-1", "1e999", "\n", " 7 "]))
def test_mutated_files_raise_only_design_errors(tmp_path, which, pos, junk):
    texts = {"blocks": BLOCKS, "nets": NETS, "pl": PL}
    t = texts[which]
    k = pos % (len(t) + 1)
    texts[which] = t[:k] + junk + t[k + 1:]
    p = _write(tmp_path, texts["blocks"], texts["nets"], texts["pl"])
    try:
        fw.load(p)
    except DesignError as e:
        assert "\n" not in str(e)


def test_command_line_whitespace_and_aspect(tmp_path, capsys):
    import json

    from floorwidget.cli import main

    p = _write(tmp_path)
    out = tmp_path / "t.json"
    assert main(["convert", str(p), str(out), "--whitespace", "0.2", "--aspect", "0.5"]) == 0
    d = fw.load(out)
    assert d.die.tolist() == pytest.approx([0.0, 0.0, 60.0, 30.0])  # as worked above
    assert main(["report", str(p), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["num_blocks"] == 5
    # bad input: one line naming the file, exit 2
    assert main(["report", str(p), "--whitespace", "-1"]) == 2
    err = capsys.readouterr().err.strip()
    assert "t.blocks" in err and "whitespace" in err and "\n" not in err
    assert main(["report", str(out), "--aspect", "2"]) == 2
    assert "GSRC" in capsys.readouterr().err
