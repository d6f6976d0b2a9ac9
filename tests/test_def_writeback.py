"""DEF write-back: what goes in comes back, except the placement the tool changed.

The comparison of input and output is independent of the reader under test: a small
statement-level comparator here (:func:`def_statements`) splits both texts on ``;`` into
whitespace-normalised statements, grouped by section, following the statement syntax of the
public LEF/DEF Language Reference 5.8 (statements end in ``;``, sections end in ``END name``).
Positions are checked against the floorplan in database units, ``round(µm x UNITS)``.
"""

from __future__ import annotations

import gzip
import re
import warnings
from pathlib import Path

import numpy as np
import pytest

import floorwidget as fw
from floorwidget.cli import main
from floorwidget.design import FIXED, MOVABLE, ORIENT_CODE, PINNED
from floorwidget.formats.lefdef import LefDefWarning, read_def

DATA = Path(__file__).parent / "data" / "lefdef"
LEFS = [DATA / "kestrel_tech.lef", DATA / "kestrel_cells.lef"]
REAL = Path(__file__).resolve().parents[2] / "shared" / "realdata"

# ---------------------------------------------------------------------------------------------
# the comparator (no floorwidget code)

SECTIONS = {"PROPERTYDEFINITIONS", "VIAS", "STYLES", "NONDEFAULTRULES", "REGIONS",
            "COMPONENTMASKSHIFT", "COMPONENTS", "PINS", "PINPROPERTIES", "BLOCKAGES", "SLOTS",
            "FILLS", "SPECIALNETS", "NETS", "SCANCHAINS", "GROUPS"}
_COMMENT = re.compile(r"(?m)(?:^|(?<=[\s;]))#[^\n]*")


def def_statements(text: str) -> dict[str, list[str]]:
    """``"HEAD"``: the top-level statements in order (section headers included, e.g.
    ``COMPONENTS 12``); one list per section of its statements in order.  Statements are
    whitespace-normalised with parentheses spaced, so equal meaning compares equal."""
    text = _COMMENT.sub(" ", text)
    text = re.sub(r"\s*([()])\s*", r" \1 ", text)
    out: dict[str, list[str]] = {"HEAD": []}
    section = None
    for piece in text.split(";"):
        words = piece.split()
        while len(words) >= 2 and words[0] == "END" and words[1] != "DESIGN":
            assert words[1] == section, f"END {words[1]} closes {section}"
            section = None
            words = words[2:]
        if words[:2] == ["END", "DESIGN"]:
            assert section is None and len(words) == 2
            out["HEAD"].append("END DESIGN")
            break
        if not words:
            continue
        if section is None and words[0] in SECTIONS:
            section = words[0]
            assert section not in out, f"second {section} section"
            head = 1 if section == "PROPERTYDEFINITIONS" else 2
            out["HEAD"].append(" ".join(words[:head]))
            out[section] = []
            words = words[head:]
            if not words:
                continue
        out[section or "HEAD"].append(" ".join(words))
    return out


def options(stmt: str) -> tuple[list[str], list[str]]:
    """``- name model`` (or ``- name``) and the ``+ ...`` options of one statement."""
    parts = stmt.split(" + ")
    return parts[0].split(), ["+ " + p for p in parts[1:]]


def by_name(stmts: list[str]) -> dict[str, str]:
    return {s.split()[1]: s for s in stmts}


def placement_of(stmt: str) -> str | None:
    found = [o for o in options(stmt)[1]
             if o.split()[1] in ("PLACED", "FIXED", "COVER", "UNPLACED")]
    return found[0] if found else None


def without(stmt: str, keys: set[str]) -> list[str]:
    """The statement's head and options but those starting with ``keys``, and ``FW_STATUS``
    properties."""
    head, opts = options(stmt)
    return head + [o for o in opts if o.split()[1] not in keys and "FW_STATUS" not in o]


def placed_text(fp, i: int, dbu: int = 1000) -> str:
    word = {MOVABLE: "PLACED", PINNED: "FIXED", FIXED: "FIXED"}[int(fp.status[i])]
    return (f"+ {word} ( {round(fp.x[i] * dbu)} {round(fp.y[i] * dbu)} ) "
            f"{fp.orientation(fp.design.names[i])}")


# ---------------------------------------------------------------------------------------------
# a hand-written design carrying every section the write-back must keep

OSPREY = """\
# Invented "osprey" test block (hand-written for floorwidget tests).
VERSION 5.8 ;
DIVIDERCHAR "/" ;
BUSBITCHARS "[]" ;
DESIGN osprey_top ;
UNITS DISTANCE MICRONS 1000 ;
HISTORY floorplan started by hand ;
PROPERTYDEFINITIONS
  DESIGN stage STRING "floorplan" ;
  COMPONENT origin STRING ;
  NET critical INTEGER ;
END PROPERTYDEFINITIONS

DIEAREA ( 0 0 ) ( 600000 500000 ) ;

ROW core_north_0 kcore 20000 30000 N DO 2000 BY 200 STEP 200 2000 ;
ROW core_south_1 kcore 20000 430000 FS DO 2000 BY 1 STEP 200 0 ;
TRACKS X 100 DO 2500 STEP 200 LAYER m1 ;
TRACKS Y 100 DO 2000 STEP 200 LAYER m2 ;
GCELLGRID X 0 DO 50 STEP 10000 ;
GCELLGRID Y 0 DO 40 STEP 10000 ;
OSPREY_NOTE keep this statement as it is ;

VIAS 1 ;
- v12_big + RECT m1 ( -100 -100 ) ( 100 100 ) + RECT m2 ( -100 -100 ) ( 100 100 ) ;
END VIAS

NONDEFAULTRULES 1 ;
- wide_clk + LAYER m1 WIDTH 400 + LAYER m2 WIDTH 400 ;
END NONDEFAULTRULES

REGIONS 1 ;
- reg_west ( 20000 30000 ) ( 120000 34000 ) + TYPE FENCE ;
END REGIONS

COMPONENTS 10 ;
- u_ram0 ram_k1 + FIXED ( 100000 200000 ) N ;
- u_ram1 ram_k1 + SOURCE DIST + PLACED ( 200000 100000 ) W + PROPERTY origin "hand" ;
- u_ram2 ram_k1 + COVER ( 50000 50000 ) FE ;
- u_ram3 ram_k1
    + PLACED ( 300000 250000 ) FS
    + HALO 5000 5000 5000 5000 ;
- u_pll pll_k + WEIGHT 4 + PLACED ( 400000 300000 ) FN ;
- u_inv0 inv_k + UNPLACED ;
- u_inv1 inv_k + PLACED ( 20000 30000 ) N ;
- u_inv2 inv_k ;
- u_inv3 inv_k + PLACED ( 60000 32000 ) FS + REGION reg_west ;
- u_pad pad_k + FIXED ( 10000 20000 ) N ;
END COMPONENTS

PINS 3 ;
- clk_in + NET clk + DIRECTION INPUT + USE CLOCK
  + LAYER m2 ( -100 0 ) ( 100 400 )
  + FIXED ( 260000 0 ) N ;
- d_out + NET dq + DIRECTION OUTPUT + USE SIGNAL
  + PORT + LAYER m3 ( -100 0 ) ( 100 400 ) + PLACED ( 600000 200000 ) W
  + PORT + LAYER m3 ( -100 0 ) ( 100 400 ) + PLACED ( 600000 220000 ) W ;
- spare_in + NET spare + DIRECTION INPUT + LAYER m2 ( -50 0 ) ( 50 200 )
  + PLACED ( 0 300000 ) E ;
END PINS

BLOCKAGES 3 ;
- PLACEMENT RECT ( 450000 350000 ) ( 500000 400000 ) ;
- PLACEMENT + PARTIAL 40 RECT ( 300000 20000 ) ( 350000 60000 ) ;
- LAYER m1 RECT ( 0 0 ) ( 1000 1000 ) ;
END BLOCKAGES

SPECIALNETS 1 ;
- VDD ( * VDD ) + USE POWER
  + ROUTED m1 200 ( 20000 31900 ) ( 420000 * )
    NEW m2 400 ( 30000 30000 ) ( * 400000 ) ;
END SPECIALNETS

NETS 6 ;
- clk ( PIN clk_in ) ( u_pll CK ) ( u_ram0 A ) ( u_ram1 A ) + USE CLOCK
  + NONDEFAULTRULE wide_clk ;
- dq ( u_ram0 Q ) ( PIN d_out ) + USE SIGNAL + WEIGHT 3 + PROPERTY critical 1 ;
- n1 ( u_inv0 A ) ( u_inv1 Y ) ( u_ram2 Q ) ( u_inv2 A ) ( u_inv3 A )
  + ROUTED m1 ( 20500 31000 ) ( 220000 * ) ;
- n2 ( u_ram3 A ) ( u_ram1 Q ) ( u_pad PAD ) ;
- lonely ( u_ram3 Q ) + USE SIGNAL ;
- spare ( PIN spare_in ) ;
END NETS

GROUPS 2 ;
- grp_west u_inv3 + REGION reg_west ;
- grp_free u_inv1 + PROPERTY origin "hand" ;
END GROUPS

END DESIGN
"""


@pytest.fixture()
def osprey(tmp_path):
    p = tmp_path / "osprey.def"
    p.write_text(OSPREY)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the reader counts what it skips
        return read_def(p, lef=LEFS)


def test_comparator_sees_every_section_of_the_hand_written_design():
    s = def_statements(OSPREY)
    assert {"PROPERTYDEFINITIONS", "VIAS", "NONDEFAULTRULES", "REGIONS", "COMPONENTS", "PINS",
            "BLOCKAGES", "SPECIALNETS", "NETS", "GROUPS"} <= set(s)
    assert len(s["COMPONENTS"]) == 10 and len(s["NETS"]) == 6 and len(s["PINS"]) == 3
    assert "OSPREY_NOTE keep this statement as it is" in s["HEAD"]
    # a changed placement is seen
    moved = OSPREY.replace("( 20000 30000 ) N ;", "( 20200 30000 ) N ;")
    assert def_statements(moved)["COMPONENTS"] != s["COMPONENTS"]


def test_convert_writes_the_input_back_unchanged(osprey, tmp_path):
    out = tmp_path / "out.def"
    assert main(["convert", str(tmp_path / "osprey.def"), str(out), "--lef",
                 *map(str, LEFS)]) == 0
    assert def_statements(out.read_text()) == def_statements(OSPREY)
    assert out.read_text() == OSPREY  # verbatim, comments included
    assert sorted(p.name for p in tmp_path.iterdir()) == ["osprey.def", "out.def"]  # no LEF


def test_edits_change_only_what_was_edited(osprey, tmp_path):
    d = osprey
    ix = d.index
    fp = d.initial.copy()
    for nm in ("u_ram0", "u_ram2", "u_pad", "clk_in"):  # FIXED, COVER, a FIXED pad and pin
        fp.x[ix[nm]] += 7.0
    fp.x[ix["u_ram1"]], fp.y[ix["u_ram1"]] = 250.0, 120.0
    fp.orient[ix["u_ram1"]] = ORIENT_CODE["S"]
    fp.x[ix["u_inv1"]] += 0.2
    fp.status[ix["u_inv3"]] = PINNED
    fp.x[ix["u_inv2"]], fp.y[ix["u_inv2"]] = 100.0, 30.0  # placed; u_inv0 stays unplaced
    fp.x[ix["d_out"]], fp.y[ix["d_out"]] = 599.6, 250.0
    s = fw.Session(d, fp)
    s.set_halo("u_pll", [1.0, 2.0, 3.0, 4.0])
    s.set_halo("u_ram3", 0.0)
    s.remove_blockage(0)
    s.add_blockage([10.0, 400.0, 60.0, 450.0], max_density=0.25)
    out = tmp_path / "out.def"
    with pytest.warns(LefDefWarning, match="4 block.s. fixed in the input"):
        fw.save(s.design, s.floorplan, out)
    fp = s.floorplan
    a, b = def_statements(OSPREY), def_statements(out.read_text())
    # every section but the edited ones as it was
    for key in set(a) | set(b):
        if key not in ("HEAD", "PROPERTYDEFINITIONS", "COMPONENTS", "PINS", "BLOCKAGES"):
            assert b[key] == a[key], key
    assert [h for h in b["HEAD"] if h != "BLOCKAGES 3"] == \
        [h for h in a["HEAD"] if h != "BLOCKAGES 3"]
    assert b["PROPERTYDEFINITIONS"] == a["PROPERTYDEFINITIONS"] + \
        ["COMPONENT FW_STATUS STRING"]
    ca, cb = by_name(a["COMPONENTS"]), by_name(b["COMPONENTS"])
    assert list(ca) == list(cb)
    # masters never renamed; options other than placement, halo and FW_STATUS kept
    for nm in ca:
        assert without(cb[nm], {"PLACED", "FIXED", "COVER", "UNPLACED", "HALO"}) == \
            without(ca[nm], {"PLACED", "FIXED", "COVER", "UNPLACED", "HALO"}), nm
    # fixed by the input: untouched, COVER stays COVER
    for nm in ("u_ram0", "u_ram2", "u_pad", "u_inv0", "u_pll"):
        assert placement_of(cb[nm]) == placement_of(ca[nm]), nm
    assert placement_of(cb["u_ram2"]).startswith("+ COVER")
    assert placement_of(cb["u_inv0"]) == "+ UNPLACED"
    for nm in ("u_ram1", "u_inv1", "u_inv2", "u_inv3"):
        assert placement_of(cb[nm]) == placed_text(fp, ix[nm]), nm
    assert placement_of(cb["u_ram1"]) == "+ PLACED ( 250000 120000 ) S"
    assert '+ PROPERTY FW_STATUS "PINNED"' in cb["u_inv3"]
    assert "+ HALO 1000 2000 3000 4000" in cb["u_pll"] and "HALO" not in cb["u_ram3"]
    # pins: the fixed one kept, the moved one's first port placed so that its shape's lower
    # left is at the floorplan's corner: W turns ( -100 0 ) ( 100 400 ) into x -400..0,
    # y -100..100 (R90 counter-clockwise, LEF/DEF Reference 5.8), so the point is +400, +100
    pa, pb = by_name(a["PINS"]), by_name(b["PINS"])
    assert pb["clk_in"] == pa["clk_in"] and pb["spare_in"] == pa["spare_in"]
    assert pb["d_out"] == pa["d_out"].replace("( 600000 200000 )", "( 600000 250100 )")
    # blockages: the kept source statements verbatim, the removed one gone, the new one added
    assert b["BLOCKAGES"] == a["BLOCKAGES"][1:] + \
        ["- PLACEMENT + PARTIAL 25 RECT ( 10000 400000 ) ( 60000 450000 )"]
    assert "BLOCKAGES 3" in b["HEAD"]


def test_written_edits_read_back_as_the_floorplan(osprey, tmp_path):
    d = osprey
    fp = d.initial.copy()
    mv = np.flatnonzero(fp.status == MOVABLE)
    fp.x[mv] += 0.4
    fp.status[d.index["u_ram1"]] = PINNED
    out = tmp_path / "out.def"
    fw.save(d, fp, out)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        back = read_def(out, lef=LEFS)
    assert np.allclose(back.initial.x, fp.x) and np.allclose(back.initial.y, fp.y)
    assert (back.initial.status == fp.status).all()
    assert (back.initial.orient == fp.orient).all()


def test_unplaced_written_without_an_option_gets_one(tmp_path):
    p = tmp_path / "o.def"
    p.write_text(OSPREY)  # u_inv2 has no placement option at all
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = read_def(p, lef=LEFS)
    fp = d.initial.copy()
    i = d.index["u_inv2"]
    fp.x[i], fp.y[i] = 40.0, 32.0
    fw.save(d, fp, tmp_path / "out.def")
    got = by_name(def_statements((tmp_path / "out.def").read_text())["COMPONENTS"])
    assert got["u_inv2"] == "- u_inv2 inv_k + PLACED ( 40000 32000 ) N"


def test_regions_edited_rewrite_regions_and_keep_other_groups(osprey, tmp_path):
    s = fw.Session(osprey)
    s.add_region("reg_east", [[400.0, 30.0, 500.0, 34.0]], kind="guide")
    out = tmp_path / "out.def"
    fw.save(s.design, s.floorplan, out)
    a, b = def_statements(OSPREY), def_statements(out.read_text())
    assert b["REGIONS"] == a["REGIONS"] + \
        ["- reg_east ( 400000 30000 ) ( 500000 34000 ) + TYPE GUIDE"]
    assert "- grp_free u_inv1 + PROPERTY origin \"hand\"" in b["GROUPS"]
    assert "- grp_west u_inv3 + REGION reg_west" in b["GROUPS"]
    for key in ("COMPONENTS", "PINS", "NETS", "SPECIALNETS", "BLOCKAGES", "VIAS"):
        assert b[key] == a[key], key


def test_cli_place_changes_only_non_fixed_placements(osprey, tmp_path):
    out = tmp_path / "placed.def"
    assert main(["place", str(tmp_path / "osprey.def"), "-o", str(out), "--lef",
                 *map(str, LEFS)]) == 0
    a, b = def_statements(OSPREY), def_statements(out.read_text())
    for key in set(a) | set(b):
        if key not in ("COMPONENTS", "PINS", "PROPERTYDEFINITIONS"):
            assert b[key] == a[key], key
    ca, cb = by_name(a["COMPONENTS"]), by_name(b["COMPONENTS"])
    keys = {"PLACED", "FIXED", "COVER", "UNPLACED"}
    for nm in ca:
        assert without(cb[nm], keys) == without(ca[nm], keys), nm
    for nm in ("u_ram0", "u_ram2", "u_pad"):
        assert cb[nm] == ca[nm]
    pa, pb = by_name(a["PINS"]), by_name(b["PINS"])
    assert pb["clk_in"] == pa["clk_in"]
    for nm in pa:
        assert without(pb[nm], {"PLACED", "FIXED"}) == without(pa[nm], {"PLACED", "FIXED"})


def test_a_design_of_its_own_gets_its_lef_and_fixed_blocks_stay(demo_design, tmp_path):
    d = demo_design
    fp = d.initial.copy()
    fixed = np.flatnonzero(fp.status == FIXED)
    assert len(fixed)
    fp.x += 3.0  # every block, the fixed ones too
    out = tmp_path / "own.def"
    with pytest.warns(LefDefWarning, match=f"{len(fixed)} block.s. fixed in the input"):
        fw.save(d, fp, out)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["own.def", "own.lef"]
    back = fw.load(out)
    assert np.allclose(back.initial.x[fixed], d.initial.x[fixed], atol=1e-3)
    mv = np.flatnonzero(fp.status != FIXED)
    assert np.allclose(back.initial.x[mv], fp.x[mv], atol=1e-3)


# ---------------------------------------------------------------------------------------------
# the shared real designs

def _real(name: str):
    folder = REAL / name
    if not folder.is_dir():
        pytest.skip(f"../shared/realdata/{name} not present")
    lefs = sorted(folder.glob("*.lef"))
    tech = [p for p in lefs if "tech" in p.name]
    srams = [p for p in lefs if p.name.startswith("sram")]
    lefs = tech + [p for p in lefs if p not in tech and p not in srams] + srams
    return folder / f"{name}.def.gz", lefs


def _round_trip_real(name: str, tmp_path):
    def_gz, lefs = _real(name)
    out = tmp_path / "out.def"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        assert main(["convert", str(def_gz), str(out), "--lef", *map(str, lefs)]) == 0
    src = gzip.decompress(def_gz.read_bytes()).decode()
    a = def_statements(src)
    b = def_statements(out.read_text())
    assert b == a  # every section, statement and option, in order
    for key in ("VIAS", "SPECIALNETS", "NETS", "PINS", "COMPONENTS"):
        assert key in b
    assert sum(h.startswith("TRACKS") for h in b["HEAD"]) > 0
    # then a floorplan with every movable component moved by one site and flipped
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        d = fw.load(def_gz, lef=lefs)
    fp = d.initial.copy()
    nc = d.num_blocks - len(a["PINS"])
    mv = np.flatnonzero(fp.status[:nc] == MOVABLE)
    fp.x[mv] += 0.054
    fp.orient[mv] = np.where(fp.orient[mv] == ORIENT_CODE["N"], ORIENT_CODE["FN"],
                             ORIENT_CODE["N"])
    fw.save(d, fp, out)
    c = def_statements(out.read_text())
    for key in set(a) | set(c):
        if key != "COMPONENTS":
            assert c[key] == a[key], key
    keys = {"PLACED", "FIXED", "COVER", "UNPLACED"}
    moved = set(mv.tolist())
    for i, (sa, sc) in enumerate(zip(a["COMPONENTS"], c["COMPONENTS"])):
        if i in moved:
            assert without(sc, keys) == without(sa, keys)
            assert placement_of(sc) == placed_text(fp, i)
        else:
            assert sc == sa
    return len(mv)


@pytest.mark.slow
@pytest.mark.skipif(not (REAL / "aes_cipher_top").is_dir(),
                    reason="../shared/realdata/aes_cipher_top not present")
def test_real_aes_round_trip(tmp_path):
    assert _round_trip_real("aes_cipher_top", tmp_path) > 10000


@pytest.mark.slow
@pytest.mark.skipif(not (REAL / "ariane136").is_dir(),
                    reason="../shared/realdata/ariane136 not present")
def test_real_ariane136_round_trip(tmp_path):
    assert _round_trip_real("ariane136", tmp_path) > 100000
