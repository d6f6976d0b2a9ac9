"""The floorplan-shape figures in pictures, on the canvas and in the widget panel."""

from __future__ import annotations

import numpy as np
import pytest
from test_floorplan_shape import macro_design  # tests/ is on sys.path

from floorwidget import metrics as M
from floorwidget.design import Floorplan
from floorwidget.render import render
from floorwidget.synth import rent_design
from floorwidget.widget.geometry import zigzag_rows


@pytest.fixture
def shaped():
    """m0 and m1 side by side 3 µm apart (a narrow channel under the 4-row default: rows 1 µm);
    m2 against the left core edge with its pins on its left side (facing the wall)."""
    d = macro_design([(10, 10), (10, 10), (6, 8)], pins=[(2, -2.5, 0.0), (2, -2.0, 1.0)],
                     core=(0, 0, 60, 40))
    return d, Floorplan(d, [20, 33, 0.0], [20, 20, 5.0])


def test_render_marks_channels_and_pins_to_wall(shaped, tmp_path):
    d, fp = shaped
    assert M.channel_gaps(d, fp).pairs.tolist() == [[0, 1]]
    assert M.facing_wall(d, fp).tolist() == [2]
    out = tmp_path / "shape.svg"
    render(d, fp, out)
    svg = out.read_text()
    assert 'id="channel:m0:m1"' in svg and 'id="pins-to-wall:m2"' in svg
    assert "pins-to-wall:m0" not in svg and "1 narrow channels" in svg


def test_wall_bar_lies_on_the_pin_side_inside_the_footprint(shaped):
    d, fp = shaped
    blocks, bars = M.wall_bars(d, fp)
    r = fp.rects()[2]
    assert blocks.tolist() == [2]
    # left side: from the footprint's left edge inward, full height
    assert bars[0, 0] == r[0] and bars[0, 1] == r[1] and bars[0, 3] == r[3]
    assert r[0] < bars[0, 2] < (r[0] + r[2]) / 2


def test_zigzag_stays_in_its_strip_and_crosses_it():
    strips = np.array([[10.0, 0.0, 13.0, 30.0], [0.0, 5.0, 40.0, 7.0]])
    x, y = zigzag_rows(strips, np.array([True, False]), max_teeth=24)
    for k, s in enumerate(strips):
        assert (x[k] >= s[0] - 1e-12).all() and (x[k] <= s[2] + 1e-12).all()
        assert (y[k] >= s[1] - 1e-12).all() and (y[k] <= s[3] + 1e-12).all()
    # the vertical strip is 3 wide and 30 long: 10 teeth at 45 degrees, side to side
    assert np.unique(x[0]).tolist() == [10.0, 13.0] and y[0][10] == 30.0
    assert np.allclose(np.diff(y[0][:11]), 3.0)


bq = pytest.importorskip("bqplot")


def test_canvas_draws_channels_and_bars(shaped):
    from floorwidget.widget.canvas import Canvas

    d, fp = shaped
    c = Canvas(d, fp, size=300)
    assert c.marks["channels"].visible and c.marks["wall_bars"].visible
    x = np.asarray(c.marks["channels"].x).reshape(-1, 5)  # one row may come back flat
    assert x.shape == (1, 5) and np.allclose(x[0, :3], [30, 33, 33])
    assert c.walled.tolist() == [2]
    # channel closed (m1 moved 20 µm away) and m2 turned so its pins face the logic: both go
    moved = fp.copy()
    moved.x[1] = 53.0
    moved.orient[2] = 1  # S: pins on the right
    c.update(moved)
    assert not c.marks["channels"].visible and not c.marks["wall_bars"].visible
    assert c.element_counts()["channels"] == 0


def test_panel_shows_the_figures_and_the_table_has_their_columns(shaped):
    from floorwidget.widget import FloorplanWidget

    d, fp = shaped
    w = FloorplanWidget(d, fp, size=300)
    for text in ("Narrow channels", "Pins to a wall", "Logic regions"):
        assert text in w.readouts.html.value
    w.keep("a")
    table = w.alternatives.table_html()
    for text in ("narrow ch.", "pins to wall", "logic regions", "largest"):
        assert text in table
    assert "narrow channel" in w.view.legend.value and "pins toward a wall" in w.view.legend.value


@pytest.mark.parametrize("layout", ["periphery", "free"])
def test_layout_control_reaches_session_place(layout):
    from floorwidget.widget import FloorplanWidget

    d = rent_design(400, num_macros=4, seed=2)
    w = FloorplanWidget(d, size=300)
    w.toolbar.layout_style.value = layout
    assert w.place(wait=True)
    assert w.session.log[-1]["kwargs"]["macro_layout"] == layout
    assert w.floorplan.info.get("macro_layout") == layout


def test_fw_render_stays_callable_after_importing_the_module(shaped, tmp_path):
    import floorwidget as fw
    from floorwidget.render import side_by_side

    d, fp = shaped
    fw.render(d, fp, tmp_path / "one.svg")  # the package attribute may now be the module
    fig = side_by_side(d, {"a": fp, "b": d.initial}, tmp_path / "two.svg")
    assert len(fig.axes) == 2 and (tmp_path / "two.svg").stat().st_size > 0
