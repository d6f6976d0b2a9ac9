"""The power grid: geometry, errors, DEF out and back in, the placer honouring the straps.

Geometry is checked independently with shapely (Gillies et al., the GEOS geometry engine):
stripes at the set pitch and width with VDD/VSS alternating, each ring enclosing the core,
a followpin on every row edge, nothing outside the die.  The DEF text is parsed a second time
by a regular expression written here from the DEF syntax (``+ ROUTED layer width + SHAPE s
( x y ) ( x y )``), not by the project's reader.  The channel rule is restated here with
shapely; the strap cap is the partial-blockage rule (cells fill at most ``cell_density`` of a
strap's footprint), measured with shapely areas.
"""

from __future__ import annotations

import gzip
import re
from pathlib import Path

import numpy as np
import pytest
import shapely

import floorwidget as fw
from floorwidget.design import CELL, MACRO, MOVABLE, DesignError
from floorwidget.floorplan.power import GridSpec, build_grid, load_spec
from floorwidget.formats.lefdef import read_def, write_def_pair
from floorwidget.kernels.power import FOLLOWPIN, RING, STRIPE
from floorwidget.metrics import straps_blocked
from floorwidget.placer.straps import clear_strap_channels
from floorwidget.session import Session
from floorwidget.synth import rent_design

SPEC = GridSpec(strap_layers=("M2", "M3"), strap_width=1.0, strap_spacing=0.5,
                strap_pitch=(12.0, 10.0), strap_offset=(3.0, 4.0), cell_density=0.3)
DEMO_SPEC = GridSpec(strap_layers=("M2", "M3"), strap_width=8.0, strap_spacing=4.0,
                     strap_pitch=(150.0, 120.0), strap_offset=(40.0, 30.0),
                     ring_layers=("M5", "M4"), ring_width=4.0, ring_spacing=2.0,
                     ring_offset=3.0)


def _boxes(r: np.ndarray):
    return shapely.box(r[:, 0], r[:, 1], r[:, 2], r[:, 3])


@pytest.fixture(scope="module")
def small():
    """1,500 standard cells and two macros (Rent's rule netlist, rows, 60 % full), core = die."""
    return rent_design(1500, seed=1, num_macros=2, macro_area=0.2, utilisation=0.6)


@pytest.fixture(scope="module")
def placed(small):
    """The small design with the grid, placed by the Session."""
    s = Session(small)
    s.power_grid(SPEC)
    s.place()
    return s


# --- geometry -------------------------------------------------------------------------------


def test_stripes_at_pitch_and_width_alternating(demo_design):
    g = build_grid(demo_design, DEMO_SPEC)
    names = list(g.layers)
    core = demo_design.core
    for k, (lay, axis) in enumerate(((DEMO_SPEC.strap_layers[0], 0),
                                     (DEMO_SPEC.strap_layers[1], 1))):
        sel = (g.shape == STRIPE) & (g.layer == names.index(lay))
        r = g.rects[sel]
        polys = _boxes(r)
        # width across, from shapely's bounds, and the pitch between centres
        b = shapely.bounds(polys)
        across = b[:, 2 + axis] - b[:, axis]
        assert np.allclose(across, DEMO_SPEC.strap_width)
        centre = (b[:, axis] + b[:, 2 + axis]) / 2
        order = np.argsort(centre)
        assert np.allclose(np.diff(centre[order]), DEMO_SPEC.strap_pitch[k])
        assert centre[order][0] == pytest.approx(core[axis] + DEMO_SPEC.strap_offset[k])
        # the last one is within a pitch of the far core edge
        assert core[2 + axis] - centre[order][-1] < DEMO_SPEC.strap_pitch[k]
        net = g.net[sel][order]
        assert (net[::2] == 0).all() and (net[1::2] == 1).all()  # VDD, VSS, VDD, ...
        # every strap crosses the core from edge to edge
        core_box = shapely.box(*core)
        cut = shapely.intersection(polys, core_box)
        along = 1 - axis
        length = shapely.bounds(cut)[:, 2 + along] - shapely.bounds(cut)[:, along]
        assert np.allclose(length, core[2 + along] - core[along])


def test_rings_enclose_the_core_and_nothing_leaves_the_die(demo_design):
    g = build_grid(demo_design, DEMO_SPEC)
    core = shapely.box(*demo_design.core)
    for net in (0, 1):
        ring = shapely.union_all(_boxes(g.rects[(g.shape == RING) & (g.net == net)]))
        assert ring.geom_type == "Polygon" and len(ring.interiors) == 1
        hole = shapely.Polygon(ring.interiors[0])
        assert hole.contains(core)
        # VDD inside: its hole is the core grown by the offset; VSS further out
        grow = DEMO_SPEC.ring_offset + net * (DEMO_SPEC.ring_width + DEMO_SPEC.ring_spacing)
        assert hole.area == pytest.approx(
            shapely.buffer(core, grow, join_style="mitre").area)
    assert shapely.box(*demo_design.die).contains(shapely.union_all(_boxes(g.rects)))


def test_followpin_on_every_row_edge(small):
    g = build_grid(small, SPEC)
    fpins = g.rects[g.shape == FOLLOWPIN]
    assert (g.layer[g.shape == FOLLOWPIN] == 0).all()  # the lowest layer by default
    lines = shapely.union_all(_boxes(fpins))
    x0 = small.row_x
    x1 = x0 + small.row_site_width * small.row_num_sites
    for y in np.concatenate([small.row_y, small.row_y + small.row_height]):
        edge = shapely.LineString([(x0.min(), y), (x1.max(), y)])
        assert lines.covers(edge)
    # net by orientation: an N row has VSS at the bottom, an FS row VDD (common practice)
    net = g.net[g.shape == FOLLOWPIN]
    for r in range(len(small.row_y)):
        y = small.row_y[r]
        k = np.flatnonzero((fpins[:, 1] <= y + 1e-9) & (fpins[:, 3] >= y - 1e-9))
        assert len(k) == 1
        assert net[k[0]] == (0 if small.row_orient[r] == 5 else 1)
    assert len(fpins) == len(np.unique(np.concatenate([small.row_y,
                                                        small.row_y + small.row_height])))
    # here the core is the die: the followpins on its edges stay inside it
    assert shapely.box(*small.die).contains(shapely.union_all(_boxes(g.rects)))


# --- errors ---------------------------------------------------------------------------------


@pytest.mark.parametrize("changes, words", [
    ({"ring_layers": ("M5", "M4")}, "outside the die"),
    ({"strap_pitch": 1.2}, "smaller than strap width + spacing"),
    ({"strap_layers": ("M2", "M77")}, "unknown layer 'M77'"),
    ({"strap_layers": ("M3", "M2")}, "runs horizontal"),
    ({"strap_width": -1.0}, "strap_width must be a positive number"),
    ({"cell_density": 2.0}, "cell_density must be in [0, 1]"),
    ({"strap_offset": 500.0}, "no strap on M2 fits in the core"),
    ({"macro_rings": ("nope",), "ring_layers": ("M5", "M4"), "ring_offset": 0.0,
      "ring_width": 0.0001}, None),
])
def test_a_grid_that_cannot_fit_is_one_line(small, changes, words):
    spec = {**SPEC.to_dict(), **changes}
    with pytest.raises(DesignError) as e:
        build_grid(small, GridSpec.from_dict(spec))
    msg = str(e.value)
    assert "\n" not in msg and msg.startswith("power grid:")
    if words:
        assert words in msg
    s = Session(small)
    before = s.design
    with pytest.raises(DesignError):
        s.power_grid(spec)
    assert s.design is before and not s.can_undo


def test_unknown_spec_field_and_spec_file(tmp_path, small):
    with pytest.raises(DesignError, match="unknown field"):
        GridSpec.from_dict({"strap_pich": 3})
    p = tmp_path / "grid.json"
    p.write_text('{"strap_layers": ["M2", "M3"], "strap_pitch": "wide"}')
    with pytest.raises(DesignError) as e:
        load_spec(str(p))
    assert str(p) in str(e.value)
    p.write_text('{"strap_layers": ["M2", "M3"], "strap_pitch": [12, 10]}')
    assert load_spec(str(p)).strap_pitch == (12.0, 10.0)


# --- DEF out and back in ----------------------------------------------------------------------

_SEG = re.compile(r"(?:ROUTED|NEW)\s+(\S+)\s+(\d+)\s+\+\s+SHAPE\s+(\w+)\s+"
                  r"\(\s*(-?\d+)\s+(-?\d+)\s*\)\s*\(\s*(-?\d+)\s+(-?\d+)\s*\)")


def _parse_specialnets(text: str) -> dict:
    """Per net name: list of (layer, width, shape, x0, y0, x1, y1) in database units."""
    body = re.search(r"^SPECIALNETS\s+\d+\s*;(.*?)^END SPECIALNETS", text, re.S | re.M)
    assert body, "no SPECIALNETS section"
    out = {}
    for stmt in body.group(1).split(";"):
        m = re.match(r"\s*-\s+(\S+)", stmt)
        if m:
            out[m.group(1)] = [(s[0], int(s[1]), s[2], *map(int, s[3:])) for s in
                               _SEG.findall(stmt)]
    return out


def _check_stripes(segs, layer, vertical, width_dbu, pitch_dbu):
    """Stripes of ``layer`` in parsed segments: one width, straight, centres at the pitch."""
    st = [s for s in segs if s[0] == layer and s[2] == "STRIPE"]
    assert st, f"no stripes on {layer}"
    assert {s[1] for s in st} == {width_dbu}
    pos = np.unique([s[3] if vertical else s[4] for s in st])  # (pieces cut over macros)
    assert all((s[3] == s[5]) if vertical else (s[4] == s[6]) for s in st)
    assert np.all(np.abs(np.diff(pos) - pitch_dbu) <= 1)  # rounding to database units
    return pos


def test_def_out_and_back(tmp_path, placed):
    d, fp = placed.design, placed.floorplan
    p = tmp_path / "blk.def"
    write_def_pair(d, fp, p)
    text = p.read_text()
    nets = _parse_specialnets(text)
    assert set(nets) == {"VDD", "VSS"}
    assert re.search(r"-\s+VDD\s+\(\s*\*\s+VDD\s*\)\s+\+\s+USE\s+POWER", text)
    dbu = d.dbu
    both = nets["VDD"] + nets["VSS"]
    vx = _check_stripes(both, "M2", True, round(SPEC.strap_width * dbu),
                        round(SPEC.strap_pitch[0] * dbu))
    _check_stripes(both, "M3", False, round(SPEC.strap_width * dbu),
                   round(SPEC.strap_pitch[1] * dbu))
    assert vx[0] == round((d.core[0] + SPEC.strap_offset[0]) * dbu)
    assert any(s[2] == "FOLLOWPIN" for s in both)
    # our reader: the same rectangles (as drawn for the floorplan), layers and widths
    back = read_def(p)
    want = d.power_shapes(fp)
    got = back.power
    assert len(got) == len(want)
    key = lambda g: np.lexsort((g.rects[:, 3], g.rects[:, 2], g.rects[:, 1], g.rects[:, 0]))  # noqa: E731
    a, b = key(want), key(got)
    assert np.allclose(want.rects[a], got.rects[b], atol=1.0 / dbu)
    assert [want.layers[i] for i in want.layer[a]] == [got.layers[i] for i in got.layer[b]]
    assert np.array_equal(want.net[a], got.net[b]) and np.array_equal(want.shape[a],
                                                                      got.shape[b])
    assert np.allclose(want.width[a], got.width[b])


def test_writeback_replaces_the_power_wiring_only(tmp_path, small):
    src = tmp_path / "src.def"
    write_def_pair(small, small.initial, src)
    text = src.read_text()
    # an input with its own power wiring and one other special net
    text = text.replace("NETS ", "SPECIALNETS 2 ;\n- VDD ( * VDD ) + USE POWER\n"
                        "  + ROUTED M1 400 ( 0 1000 ) ( 80000 1000 ) ;\n"
                        "- shield_a ( * X ) + USE SIGNAL\n"
                        "  + ROUTED M2 100 ( 0 0 ) ( 0 9000 ) ;\nEND SPECIALNETS\n\nNETS ", 1)
    src.write_text(text)
    d = read_def(src)
    assert d.power is not None and len(d.power) == 1
    assert d.power.width[0] == pytest.approx(0.4)
    out = tmp_path / "same.def"
    fw.save(d, d.initial, out)
    assert out.read_text() == text  # unedited: byte for byte
    s = Session(d)
    s.power_grid(SPEC)
    fw.save(s.design, s.floorplan, out)
    new = out.read_text()
    nets = _parse_specialnets(new)
    assert re.search(r"^SPECIALNETS 3 ;", new, re.M)
    assert set(nets) == {"VDD", "VSS", "shield_a"}
    assert "- shield_a ( * X ) + USE SIGNAL\n  + ROUTED M2 100 ( 0 0 ) ( 0 9000 ) ;" in new
    assert not any(seg[0] == "M1" and seg[1] == 400 for seg in nets["VDD"])
    lef = str(src.with_suffix(".lef"))
    assert read_def(out, lef=lef).power is not None
    s.clear_power_grid()
    fw.save(s.design, s.floorplan, out)
    cleared = out.read_text()
    assert re.search(r"^SPECIALNETS 1 ;", cleared, re.M) and "- VDD" not in cleared
    assert read_def(out, lef=lef).power is None


# --- the placer -----------------------------------------------------------------------------


def _channel_violations(d, fp) -> int:
    """The channel rule restated with shapely: per low stripe, its band widened by the
    spacing and clipped to a macro's span along the stripe must lie inside the macro or
    miss it."""
    g = d.power
    st = g.rects[g.low_stripes()]
    vert = (st[:, 3] - st[:, 1]) > (st[:, 2] - st[:, 0])
    sp = g.spacing
    bad = 0
    for m in fp.rects()[d.kind == MACRO]:
        macro = shapely.box(*m)
        for r, v in zip(st, vert):
            a = 1 if v else 0  # the axis the stripe runs along
            lo, hi = max(m[a], r[a]), min(m[a + 2], r[a + 2])
            if hi <= lo:
                continue  # the stripe does not reach the macro
            band = (shapely.box(r[0] - sp, lo, r[2] + sp, hi) if v
                    else shapely.box(lo, r[1] - sp, hi, r[3] + sp))
            if shapely.intersection(band, macro).area > 1e-9 and not band.within(macro):
                bad += 1
    return bad


def test_placer_keeps_cells_under_the_cap_and_macros_off_strap_edges(placed):
    d, fp = placed.design, placed.floorplan
    g = d.power
    cells = shapely.union_all(_boxes(fp.rects()[d.kind == CELL]))
    core = shapely.box(*d.core)
    low = g.rects[g.low_stripes()]
    shares = []
    for r in low:
        strap = shapely.intersection(shapely.box(*r), core)
        if strap.area:
            shares.append(shapely.intersection(strap, cells).area / strap.area)
    assert max(shares) <= g.cell_density + 1e-6
    assert max(shares) > 0  # cells do sit under the straps, up to the cap
    assert placed.report["straps_blocked"] == 0 == _channel_violations(d, fp)
    assert placed.report["legal"]


def test_channel_repair_and_metric_agree_with_shapely(small):
    d = small.derive(power=build_grid(small, SPEC))
    fp = d.initial.copy()
    rng = np.random.default_rng(3)
    m = np.flatnonzero(d.kind == MACRO)
    fp.status[m] = MOVABLE
    hits = 0
    for _ in range(5):  # random macro spots: the metric counts what shapely counts
        fp.x[m] = np.round(rng.uniform(0, d.core[2] - d.width[m]) / 0.2) * 0.2
        fp.y[m] = np.round(rng.uniform(0, d.core[3] - d.height[m]) / 2.0) * 2.0
        n = straps_blocked(d, fp)
        assert (n > 0) == (_channel_violations(d, fp) > 0)
        hits += n
        out, left = clear_strap_channels(d, fp)
        assert left == straps_blocked(d, out) == _channel_violations(d, out) == 0
    assert hits > 0


# --- the Session ----------------------------------------------------------------------------


def test_session_undo_script_and_file(tmp_path, demo_design):
    s = Session(demo_design)
    s.power_grid(DEMO_SPEC.to_dict())
    g = s.design.power
    assert g is not None and g.spec == DEMO_SPEC.to_dict()
    s.undo()
    assert s.design.power is None
    s.redo()
    assert s.design.power is g
    script = s.script()
    assert "session.power_grid({" in script
    ns: dict = {}
    exec(compile(script, "replay", "exec"), ns)  # the replay lays the same grid
    assert np.array_equal(ns["session"].design.power.rects, g.rects)
    p = tmp_path / "s.json"
    s.save(p)
    back = Session.load(p, design=demo_design)
    assert np.array_equal(back.design.power.rects, g.rects)
    s.clear_power_grid()
    assert "session.clear_power_grid()" in s.script()
    s.save(p)
    assert Session.load(p, design=demo_design).design.power is None


# --- a real design --------------------------------------------------------------------------

ARIANE = Path(__file__).resolve().parents[2] / "shared" / "realdata" / "ariane136"


@pytest.mark.slow
@pytest.mark.skipif(not ARIANE.is_dir(), reason="ariane136 not available")
def test_ariane136_grid_reads_back(tmp_path):
    src = tmp_path / "ariane136.def"
    src.write_bytes(gzip.decompress((ARIANE / "ariane136.def.gz").read_bytes()))
    lef = [ARIANE / "asap7_tech_1x_201209.lef", ARIANE / "asap7sc7p5t_27_R_1x_201211.lef",
           *sorted(ARIANE.glob("sram_*.lef"))]
    d = fw.load(str(src), lef=[str(p) for p in lef])
    # M5 runs vertical, M4 horizontal in this technology LEF; M1-M4 are low (the SRAMs
    # obstruct them)
    spec = GridSpec(strap_layers=("M5", "M4"), strap_width=0.864, strap_spacing=0.432,
                    strap_pitch=(20.16, 25.92), strap_offset=(5.0, 6.0),
                    ring_layers=("M8", "M7"), ring_width=1.2, ring_spacing=0.6,
                    ring_offset=0.6)
    s = Session(d)
    s.power_grid(spec)
    out = tmp_path / "out.def"
    fw.save(s.design, s.floorplan, out)
    text = out.read_text()
    nets = _parse_specialnets(text)
    both = nets["VDD"] + nets["VSS"]
    dbu = d.dbu
    _check_stripes(both, "M5", True, round(spec.strap_width * dbu),
                   round(spec.strap_pitch[0] * dbu))
    _check_stripes(both, "M4", False, round(spec.strap_width * dbu),
                   round(spec.strap_pitch[1] * dbu))
    assert {seg[0] for seg in both if seg[2] == "RING"} == {"M8", "M7"}
    back = read_def(out, lef=[str(p) for p in lef])
    g = back.power
    m5 = (g.shape == STRIPE) & (g.layer == list(g.layers).index("M5"))
    x = np.unique(np.round((g.rects[m5, 0] + g.rects[m5, 2]) / 2, 3))
    assert np.allclose(np.diff(x), spec.strap_pitch[0], atol=2.0 / dbu)
    assert np.allclose(g.width[m5], spec.strap_width)
    # the channel rule: the SRAMs made movable, the repair leaves none clipping an M4 strap
    fp = s.floorplan.copy()
    mac = np.flatnonzero(d.kind == MACRO)
    fp.status[mac] = MOVABLE
    fixed, left = clear_strap_channels(s.design, fp)
    assert left == 0 == straps_blocked(s.design, fixed)
    rep = fw.evaluate(s.design, fixed)
    assert rep["macro_overlaps"] == 0 and rep["out_of_die"] == 0


# --- pictures -------------------------------------------------------------------------------


def test_render_draws_the_grid_per_net(tmp_path, demo_design):
    d = demo_design.derive(power=build_grid(demo_design, DEMO_SPEC))
    out = tmp_path / "grid.svg"
    fw.render(d, d.initial, out, show_labels=False)
    svg = out.read_text()
    assert 'id="power:VDD"' in svg and 'id="power:VSS"' in svg
    fw.render(d, d.initial, out, show_labels=False, power=False)
    assert "power:VDD" not in out.read_text()


def test_canvas_power_layer_off_by_default_and_follows_macros(demo_design):
    pytest.importorskip("bqplot")
    from floorwidget.widget import FloorplanWidget

    spec = GridSpec(**{**DEMO_SPEC.to_dict(), "macro_rings": [demo_design.macros[0]]})
    w = FloorplanWidget(demo_design, size=300, live=False)
    w.session.power_grid(spec)
    c = w.canvas
    assert not c.marks["power0"].visible  # off by default
    w.view.ctx.toggles["Power grid"].value = True
    assert c.power_on and c.marks["power0"].visible and c.marks["power1"].visible
    g = w.session.design.power_shapes(w.session.floorplan)
    drawn = len(c.marks["power0"].x) + len(c.marks["power1"].x)
    assert drawn == int((g.shape != FOLLOWPIN).sum())
    # the ring of the macro moves with it
    m = demo_design.macros[0]
    x0 = np.asarray(c.marks["power0"].x).min(axis=1)
    w.session.move(m, 600.0, 600.0)
    w.canvas.update(w.session.floorplan)
    assert not np.array_equal(np.sort(np.asarray(c.marks["power0"].x).min(axis=1)),
                              np.sort(x0))


# --- the command line -----------------------------------------------------------------------


def test_cli_place_with_a_grid(tmp_path, capsys):
    from floorwidget.cli import main

    d = rent_design(300, seed=4, num_macros=1, macro_area=0.2, utilisation=0.5)
    src = tmp_path / "blk.json"
    fw.save(d, d.initial, src)
    grid = tmp_path / "grid.json"
    grid.write_text('{"strap_layers": ["M2", "M3"], "strap_width": 0.5, "strap_pitch": 8, '
                    '"strap_spacing": 0.3, "strap_offset": 2}')
    out = tmp_path / "out.def"
    assert main(["place", str(src), "-o", str(out), "--power-grid", str(grid), "--json"]) == 0
    assert capsys.readouterr().out.count('"straps_blocked": 0') == 1
    nets = _parse_specialnets(out.read_text())
    _check_stripes(nets["VDD"] + nets["VSS"], "M2", True, round(0.5 * d.dbu), round(8 * d.dbu))
    # a grid that cannot fit: one line naming the file, exit 2, no output
    grid.write_text('{"strap_layers": ["M2", "M3"], "strap_width": 5, "strap_pitch": 4}')
    bad = tmp_path / "bad.def"
    assert main(["place", str(src), "-o", str(bad), "--power-grid", str(grid)]) == 2
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and str(grid) in err and "smaller than strap width" in err
    assert not bad.exists()


def test_formats_without_a_grid_say_so(tmp_path, small):
    d = small.derive(power=build_grid(small, SPEC))
    with pytest.warns(UserWarning, match="power grid is not stored"):
        fw.save(d, d.initial, tmp_path / "x.json")
