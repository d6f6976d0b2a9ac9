"""Headless rendering: real PNG and SVG files on disk, atomic writes, clear errors."""

from __future__ import annotations

import os
import xml.etree.ElementTree as ET

import numpy as np
import pytest

pytest.importorskip("matplotlib")

from floorwidget import style  # noqa: E402
from floorwidget.design import MACRO, PINNED, DesignError, snap  # noqa: E402
from floorwidget.render import render  # noqa: E402

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"  # PNG specification (W3C / ISO/IEC 15948), file signature


def spread(design):
    """The demo's macros on a loose lattice (no placer needed), clusters left in a pile."""
    fp = design.initial.copy()
    mac = np.flatnonzero(design.kind == MACRO)
    c = design.core
    cols = 6
    fp.x[mac] = c[0] + 30 + (np.arange(len(mac)) % cols) * 385.0
    fp.y[mac] = c[1] + 30 + (np.arange(len(mac)) // cols) * 380.0
    g0, gp = design.grid_origin, design.grid_pitch
    fp.x[mac] = snap(fp.x[mac], g0[0], gp[0])
    fp.y[mac] = snap(fp.y[mac], g0[1], gp[1])
    return fp


def test_png_written(demo_design, tmp_path, artifacts):
    fp = spread(demo_design)
    out = tmp_path / "heron.png"
    fig = render(demo_design, fp, out)
    data = out.read_bytes()
    assert data[:8] == PNG_MAGIC
    assert fig.axes
    (artifacts / "render_demo.png").write_bytes(data)
    assert [p.name for p in tmp_path.iterdir()] == ["heron.png"]   # no temporary left over


def test_svg_has_one_shape_per_macro(demo_design, tmp_path):
    fp = spread(demo_design)
    out = tmp_path / "heron.svg"
    render(demo_design, fp, out, heat="density")
    root = ET.parse(out).getroot()           # parses as XML
    assert root.tag.endswith("svg")
    ids = [el.get("id") for el in root.iter() if (el.get("id") or "").startswith("macro:")]
    assert sorted(ids) == sorted(f"macro:{m}" for m in demo_design.macros)
    ns = "{http://www.w3.org/2000/svg}"
    for el in root.iter():
        if (el.get("id") or "").startswith("macro:"):
            assert el.find(f"{ns}path") is not None


def test_status_colour_reaches_the_pixels(demo_design, tmp_path):
    # pinned macros are filled with Okabe-Ito orange: those pixels must appear in the PNG
    import matplotlib.image as mpimg

    fp = spread(demo_design)
    out = tmp_path / "p.png"
    render(demo_design, fp, out, dpi=60)
    img = mpimg.imread(out)[..., :3]
    a = style.STATUS_STYLES["pinned"].fill_opacity
    orange = a * np.array([0xE6, 0x9F, 0x00]) / 255.0 + (1 - a)   # alpha-blended over white
    before = (np.abs(img - orange).max(axis=2) < 0.06).sum()
    fp.status[demo_design.kind == MACRO] = PINNED
    render(demo_design, fp, out, dpi=60)
    img = mpimg.imread(out)[..., :3]
    after = (np.abs(img - orange).max(axis=2) < 0.06).sum()
    assert after > before + 1000


@pytest.mark.parametrize("name", ["plan.pdf", "plan", "plan.png.txt"])
def test_bad_suffix_writes_nothing(demo_design, tmp_path, name):
    with pytest.raises(DesignError, match="png"):
        render(demo_design, None, tmp_path / name)
    assert os.listdir(tmp_path) == []


def test_failed_save_leaves_nothing(demo_design, tmp_path, monkeypatch):
    from matplotlib.figure import Figure

    out = tmp_path / "keep.svg"
    out.write_text("old")

    def broken(self, f, **kw):
        f.write(b"<svg partial")
        raise RuntimeError("disk trouble")

    monkeypatch.setattr(Figure, "savefig", broken)
    with pytest.raises(RuntimeError):
        render(demo_design, None, out)
    assert out.read_text() == "old"
    assert os.listdir(tmp_path) == ["keep.svg"]


def test_bad_heat_and_missing_folder(demo_design, tmp_path):
    with pytest.raises(DesignError, match="heat"):
        render(demo_design, None, tmp_path / "a.png", heat="warmth")
    with pytest.raises(DesignError, match="does not exist"):
        render(demo_design, None, tmp_path / "nope" / "a.png")
    assert os.listdir(tmp_path) == []


def test_into_given_axes_and_heat_layers(demo_design):
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    fig = Figure()
    FigureCanvasAgg(fig)
    ax = fig.add_subplot()
    got = render(demo_design, spread(demo_design), ax=ax, heat="congestion", show_labels=False)
    assert got is fig
    assert len(fig.axes) == 2                     # the plot and the colour bar
    assert "estimates" in ax.get_title(loc="left")
    assert not ax.texts or all("µm" in t.get_text() for t in ax.texts)


def test_palette_is_okabe_ito_and_greyscale_distinct():
    # Okabe and Ito (2008): the eight colours of the palette, from memory
    assert set(style.OKABE_ITO.values()) == {"#000000", "#E69F00", "#56B4E9", "#009E73",
                                             "#F0E442", "#0072B2", "#D55E00", "#CC79A7"}
    st = style.STATUS_STYLES
    # status must read without colour: outline dash and width differ pairwise
    keys = [(s.dash, s.stroke_width) for s in st.values()]
    assert len(set(keys)) == len(keys)
    assert len({s.bq_line_style for s in st.values()}) == len(st)
    assert {s.fill for s in st.values()} <= set(style.OKABE_ITO.values())


def test_status_style_dicts_for_the_canvas():
    for key, s in style.STATUS_STYLES.items():
        d = style.status_style(key)
        assert (d["fill"], d["dash"], d["width"]) == (s.fill, s.bq_line_style, s.stroke_width)
    with pytest.raises(KeyError, match="unknown status"):
        style.status_style("asleep")
    assert style.heat_colors("congestion")[0] == style.CONGESTION_SCALE[0]
    with pytest.raises(ValueError):
        style.heat_scale("warmth")


def test_title_gives_overflow_at_the_target_used(demo_design):
    # the title said "at 0.8" whatever the target; the figure must match evaluate() at that target
    from floorwidget import metrics
    from floorwidget.kernels import fmt

    fp = demo_design.initial.copy()
    fp.info["target_density"] = 0.65  # as the placer records it
    for kw, td in (({}, 0.65), ({"target_density": 0.9}, 0.9)):
        fig = render(demo_design, fp, **kw)
        title = fig.axes[0].get_title(loc="left")
        ov = metrics.evaluate(demo_design, fp, target_density=td)["density_overflow"]
        assert f"overflow {fmt.number(ov)} at {fmt.number(td)} " in title


def test_partial_blockages_and_cell_regions_are_drawn(demo_design, tmp_path):
    import floorwidget as fw

    s = fw.Session(demo_design)
    s.add_blockage([100.0, 100.0, 300.0, 200.0], max_density=0.3)
    s.add_region("south", [400.0, 100.0, 900.0, 400.0])
    s.add_region("north", [[400.0, 1500.0, 600.0, 1700.0], [700.0, 1500.0, 900.0, 1700.0]],
                 kind="guide")
    out = tmp_path / "r.svg"
    fig = render(s.design, s.floorplan, out)
    svg = out.read_text()
    # the blockages as one collection of each kind, one shape per blockage
    cols = {c.get_gid(): c for c in fig.axes[0].collections}
    full = int((s.design.blockage_max_density == 0).sum())
    assert len(cols["blockages:partial"].get_paths()) == 1
    assert len(cols.get("blockages:full", ()).get_paths() if full else ()) == full
    assert 'id="blockages:partial"' in svg
    # one shape per region rectangle, by their ids
    for gid in ("region:south:0", "region:north:0", "region:north:1"):
        assert f'id="{gid}"' in svg
    assert "partial blockage" in svg and "guide (cells pulled in)" in svg


def test_many_blockages_are_one_collection(demo_design):
    # 100,000 small blockages (the hostile case of issue 23): one collection of 100,000 paths
    c = demo_design.core
    k = 100_000
    rng = np.random.default_rng(0)
    lo = rng.uniform(c[:2], c[2:] - 1.0, (k, 2))
    bl = np.concatenate([lo, lo + 0.5], axis=1)
    d = demo_design.derive(blockages=bl, blockage_max_density=np.where(np.arange(k) % 2, 0.3, 0))
    fig = render(d, d.initial)
    cols = {c.get_gid(): c for c in fig.axes[0].collections}
    assert len(cols["blockages:full"].get_paths()) == k // 2
    assert len(cols["blockages:partial"].get_paths()) == k // 2
    assert len(fig.axes[0].patches) < 1000  # macros, outlines: not one patch per blockage
