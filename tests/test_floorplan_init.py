"""The initial floorplan of a netlist (``floorplan/init.py``), its DEF and the CLI.

Expected values are worked out by hand from the definitions: utilisation = (cell + macro
area) / core area, the core ``sqrt(A / aspect)`` wide before rounding to whole sites and rows,
rows alternating N / FS (common practice), tracks half a pitch in from the die edge at the LEF
``PITCH`` (common practice).  The invented "wren" library: site 0.5 x 4 µm; cells inv_w 1 x 4,
nand_w 1.5 x 4; block ram_w 20 x 10 (no R90 symmetry); layers wm1 vertical, pitch 0.25, and
wm2 horizontal, pitch 0.4.  ``wren_top.v`` has two inv_w and one nand_w at the top, two inv_w
in a sub-module, one more nand_w and one ram_w: 4 + 6 + 4 + 4 + 6 + 200 = 224 µm².
"""

from __future__ import annotations

import math
import re
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
from test_verilog import LEF, TOP, pin_sets

import floorwidget as fw
from floorwidget.cli import main
from floorwidget.design import TERMINAL, DesignError
from floorwidget.floorplan.init import core_size, place_pins_evenly

AREA = 224.0
# bus[1] reaches one pin only; the design drops that net and says so
pytestmark = pytest.mark.filterwarnings("ignore:.*single-pin net")


def make(**kw):
    return fw.load(TOP, lef=[LEF], **kw)


def test_core_rows_and_utilisation_by_hand():
    d = make(utilization=0.5, margin=2)
    # A / u = 448 µm², square: W = sqrt(448) = 21.17 µm -> 42.3 sites -> 42 (21 µm);
    # 21.17 / 4 = 5.29 rows -> 5 (20 µm)
    assert core_size(AREA, 0.5, 1.0, 0.5, 4.0) == (42, 5)
    assert d.core == pytest.approx([2, 2, 23, 22])
    assert d.die == pytest.approx([0, 0, 25, 24])
    assert len(d.row_y) == 5
    assert d.row_y == pytest.approx([2, 6, 10, 14, 18])
    assert (d.row_x == 2).all() and (d.row_num_sites == 42).all()
    assert (d.row_site_width == 0.5).all() and (d.row_height == 4).all()
    assert [fw.ORIENTATIONS[o] for o in d.row_orient] == ["N", "FS", "N", "FS", "N"]
    assert d.site_name == "wsite"
    rep = fw.evaluate(d)
    assert rep["utilization"] == pytest.approx(AREA / (21 * 20))
    assert rep["cells_off_site"] == 0 and rep["cells_off_row"] == 0


def test_aspect_and_a_macro_that_cannot_fit():
    # aspect 2: W = sqrt(448 / 2) = 14.97 -> 30 sites (15 µm): ram_w (20 µm wide, no R90
    # symmetry, so never turned) fits in none of its orientations
    assert core_size(AREA, 0.5, 2.0, 0.5, 4.0) == (30, 7)
    with pytest.raises(DesignError, match="macro 'ram0' .* does not fit the core"):
        make(utilization=0.5, aspect=2.0, margin=2)


def test_explicit_die():
    d = make(die=(0, 0, 30, 30), margin=3)
    # 24 x 24 µm inside the margin: 48 sites, 6 rows
    assert d.core == pytest.approx([3, 3, 27, 27])
    assert len(d.row_y) == 6 and (d.row_num_sites == 48).all()
    assert fw.evaluate(d)["utilization"] == pytest.approx(AREA / 24**2)


def test_tracks_from_the_lef_pitches():
    d = make(utilization=0.5, margin=2)   # die 25 x 24 µm
    t = {(x.layer, x.axis): x for x in d.tracks}
    assert set(t) == {("wm1", "X"), ("wm2", "Y")}
    m1, m2 = t["wm1", "X"], t["wm2", "Y"]
    assert (m1.start, m1.step, m1.count) == (pytest.approx(0.125), 0.25, 100)  # (25-.125)/.25+1
    assert (m2.start, m2.step, m2.count) == (pytest.approx(0.2), 0.4, 60)      # (24-.2)/.4+1
    assert m1.start + (m1.count - 1) * m1.step <= 25 < m1.start + m1.count * m1.step


@pytest.mark.parametrize("kw, message", [
    (dict(utilization=0.0), r"utilization must be in \(0, 1\]"),
    (dict(utilization=1.5), r"utilization must be in \(0, 1\]"),
    (dict(utilization=0.5, aspect=-1), "aspect"),
    (dict(utilization=0.5, margin=-1), "margin"),
    (dict(die=(0, 0, 10, 10), margin=1), "exceed the core"),
    (dict(die=(0, 0, 60, 13), margin=1), "macro 'ram0' .* does not fit"),
    (dict(die=(5, 5, 1, 1)), "x1 < x2"),
    (dict(die=(0, 0, 30, 30), utilization=0.5), "either a die or a utilisation"),
    (dict(die=(0, 0, 3, 3), margin=2), "no room for a row"),
])
def test_bad_floorplan_options(kw, message):
    with pytest.raises(DesignError, match=message):
        make(**kw)


def test_a_library_without_site(tmp_path):
    text = LEF.read_text()
    nosite = re.sub(r"SITE wsite\n.*?END wsite\n", "", text, flags=re.S)
    nosite = nosite.replace("  SITE wsite ;\n", "")
    p = tmp_path / "nosite.lef"
    p.write_text(nosite)
    with pytest.raises(DesignError, match="no SITE"):
        fw.load(TOP, lef=[p])


def test_pins_spread_evenly_around_the_die():
    die = (0.0, 0.0, 25.0, 24.0)
    n, side = 8, 0.25  # no pin at a corner, where it is pushed inside
    x, y = place_pins_evenly(die, np.full(n, side), np.full(n, side))
    cx, cy = x + side / 2, y + side / 2
    # on an edge, inside the die
    on_edge = np.isclose(x, 0) | np.isclose(y, 0) | np.isclose(x + side, 25) | \
        np.isclose(y + side, 24)
    assert on_edge.all() and (x >= 0).all() and (y >= 0).all()
    assert (x + side <= 25).all() and (y + side <= 24).all()
    # arc length of each centre, counter-clockwise from the lower-left corner, projected onto
    # the die edge: (k + 1/2) P / n (P = 98 µm), to the database unit
    px = np.clip(cx, 0, 25)
    py = np.clip(cy, 0, 24)
    arc = np.where(np.isclose(y, 0), px,
                   np.where(np.isclose(x + side, 25), 25 + py,
                            np.where(np.isclose(y + side, 24), 49 + (25 - px), 74 + (24 - py))))
    assert arc == pytest.approx((np.arange(n) + 0.5) * 98 / n, abs=1e-3)
    with pytest.raises(DesignError, match="do not fit on the die perimeter"):
        place_pins_evenly(die, np.full(500, side), np.full(500, side))


def test_terminals_start_on_the_die_edges_and_cells_on_sites():
    d = make(utilization=0.5, margin=2)
    fp = d.initial
    t = d.kind == TERMINAL
    x, y, w, h = fp.x[t], fp.y[t], d.width[t], d.height[t]
    assert (np.isclose(x, 0) | np.isclose(y, 0) | np.isclose(x + w, 25)
            | np.isclose(y + h, 24)).all()
    assert fw.evaluate(d, fp)["out_of_die"] == 0


def test_def_from_scratch_reads_back(tmp_path):
    d = make(utilization=0.5, margin=2)
    fp = fw.place(d, seed=0)
    rep = fw.evaluate(d, fp)
    assert rep["legal"]
    out = tmp_path / "wren.def"
    fw.save(d, fp, out)
    assert not (tmp_path / "wren.lef").exists()  # the LEF libraries are referred to
    text = out.read_text()
    # the text, read here with regular expressions
    assert len(re.findall(r"^ROW \S+ wsite ", text, re.M)) == 5
    tracks = re.findall(r"^TRACKS (X|Y) (\d+) DO (\d+) STEP (\d+) LAYER (\S+) ;", text, re.M)
    assert sorted(tracks) == [("X", "125", "100", "250", "wm1"), ("Y", "200", "60", "400", "wm2")]
    comps = dict(re.findall(r"^- (\S+) (\S+) \+ PLACED", text, re.M))
    assert comps == {"i0": "inv_w", "i1": "nand_w", "sub\\[1\\].p/u1": "inv_w",
                     "sub\\[1\\].p/u2": "inv_w", "ram0": "ram_w", "i2": "nand_w"}
    assert len(re.findall(r"^- \S+ \+ NET ", text, re.M)) == 6
    # and by our reader: same blocks, masters, connectivity and placement
    back = fw.load(out, lef=[LEF])
    assert back.names == d.names
    assert back.block_type[:6] == d.block_type[:6]
    assert set(pin_sets(back.names, back.kind, back.net_start, back.pin_block,
                        back.pin_names)) == \
        set(pin_sets(d.names, d.kind, d.net_start, d.pin_block, d.pin_names))
    assert back.initial.x == pytest.approx(fp.x, abs=1e-3)
    assert fw.evaluate(back)["hpwl"] == pytest.approx(rep["hpwl"], abs=0.01)
    # I/O pins: the direction the Verilog declares, and a layer whose tracks cross the pin's
    # edge (a pin on the bottom or top edge on the vertical wm1, on the left or right edge on
    # the horizontal wm2: common practice); both read back
    pins = re.findall(r"^- (\S+) \+ NET \S+ \+ DIRECTION (\S+) \+ USE SIGNAL \+ LAYER (\S+) "
                      r".* \+ PLACED \( (\d+) (\d+) \)", text, re.M)
    assert sorted(p[1] for p in pins) == ["INPUT"] * 4 + ["OUTPUT"] * 2
    die = np.round(d.die * d.dbu).astype(int)
    for _, _, layer, x, y in pins:
        x, y = int(x), int(y)
        on_bottom_or_top = min(y - die[1], die[3] - y) < min(x - die[0], die[2] - x)
        assert layer == ("wm1" if on_bottom_or_top else "wm2")
    assert back.io_directions == {p[0]: p[1] for p in pins}
    assert back.io_layers == {p[0]: p[2] for p in pins}


def _cli(capsys, *args):
    """Run the console script's entry point in this process: (exit status, stdout, stderr)."""
    capsys.readouterr()
    code = main([str(a) for a in args])
    out = capsys.readouterr()
    return SimpleNamespace(returncode=code, stdout=out.out, stderr=out.err)


def test_cli_place_and_report_a_netlist(tmp_path, capsys):
    out = tmp_path / "o.def"
    r = _cli(capsys, "place", TOP, "--lef", LEF, "--utilization", "0.5", "--margin", "2", "-o", out,
             "--json")
    assert r.returncode == 0, r.stderr
    assert out.is_file()
    import json
    rep = json.loads(r.stdout)
    assert rep["utilization"] == pytest.approx(AREA / 420) and rep["legal"]
    r = _cli(capsys, "report", TOP, "--lef", LEF, "--die", 0, 0, 30, 30, "--margin", 3)
    assert r.returncode == 0, r.stderr
    line = [s for s in r.stdout.splitlines() if s.startswith("utilisation")][0]
    assert math.isclose(float(line.split()[-1]), AREA / 576, rel_tol=1e-3)


@pytest.mark.parametrize("args, message", [
    (["--utilization", "0"], "must be a number in (0, 1]"),
    (["--utilization", "0.5", "--aspect", "2"], "does not fit the core"),
    (["--top", "nope"], "top module 'nope' is not in the file"),
])
def test_cli_bad_input_exits_2_with_one_line(tmp_path, capsys, args, message):
    out = tmp_path / "o.def"
    r = _cli(capsys, "place", TOP, "--lef", LEF, "--margin", "2", *args, "-o", out)
    assert r.returncode == 2
    assert message in r.stderr and r.stderr.count("\n") == 1
    assert not out.exists()


def test_cli_bad_netlist_names_file_and_line(tmp_path, capsys):
    bad = tmp_path / "bad.v"
    bad.write_text("module t (a);\n  input a;\n  nosuch_w u (.A(a));\nendmodule\n")
    r = _cli(capsys, "report", bad, "--lef", LEF)
    assert r.returncode == 2 and f"{bad}:3:" in r.stderr and r.stderr.count("\n") == 1
    kestrel = Path(__file__).parent / "data" / "lefdef" / "kestrel.def"
    r = _cli(capsys, "report", kestrel, "--top", "t")
    assert r.returncode == 2 and "--top applies to a Verilog netlist" in r.stderr
