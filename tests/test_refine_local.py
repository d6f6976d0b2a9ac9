"""Local refine after a hand move: only the logic near what moved is re-spread.

Checked against the full refine and against the design itself (no outside reference gives a
"right" incremental answer): what lies outside the window stays bit for bit, the result is
legal, and its wirelength stays close to the full refine's (within 3 %, the live-refine
issue's bound against a full placement).
"""

from __future__ import annotations

import numpy as np
import pytest

import floorwidget as fw
from floorwidget.design import MACRO, PINNED
from floorwidget.placer import place, refine
from floorwidget.placer.flow import refine_window


@pytest.fixture(scope="module")
def moved(demo_design):
    d = demo_design
    fp = place(d, seed=0)
    i = d.block("sram_sp4k_1")  # on the west edge: moved inward by 30 grid steps
    f = fp.copy()
    f.x[i] += 30 * d.grid_pitch[0]
    f.status[i] = PINNED
    return d, fp, f, i


def test_local_refine_touches_only_the_window_and_stays_legal(moved):
    d, _, f, i = moved
    r = refine(d, f, around=[d.names[i]])
    mac = d.kind == MACRO
    shifted = np.flatnonzero(mac & ((r.x != f.x) | (r.y != f.y)))  # by the macro legaliser
    after = f.copy()  # the macros where the legaliser put them, the rest not yet moved
    after.x[mac], after.y[mac] = r.x[mac], r.y[mac]
    win = refine_window(d, f, after, np.union1d([i], shifted))
    assert 0 < r.info["window_blocks"] < d.num_blocks
    rep = fw.evaluate(d, r)
    assert rep["legal"] or rep["pinned_illegal"]
    still = ~win & ~mac
    np.testing.assert_array_equal(r.x[still], f.x[still])
    np.testing.assert_array_equal(r.y[still], f.y[still])
    full = refine(d, f)
    assert fw.metrics.hpwl(d, r) <= 1.03 * fw.metrics.hpwl(d, full)


def test_session_refine_is_local_after_a_placement_and_replays(demo_design):
    s = fw.Session(demo_design)
    s.place(seed=0)
    m = demo_design.macros[0]
    x, y = s.floorplan.position(m)
    with s.batch("drag"):
        s.move(m, x + 10.0, y + 10.0)
        s.pin(m)
        s.refine()
    local = s.floorplan.copy()
    with s.batch("again"):
        s.refine(local=False)
    assert not np.array_equal(local.x, s.floorplan.x)  # the full refine moves more
    ns: dict = {}
    exec(s.script(), ns)  # the replay makes the same choices
    r = ns["session"].floorplan
    np.testing.assert_array_equal(r.x, s.floorplan.x)
    np.testing.assert_array_equal(r.y, s.floorplan.y)


def test_window_spreading_covers_the_window_not_the_core(moved):
    """The local refine spreads its window over the window's own box (bins and obstacles of
    that box only, so the cost follows the window)."""
    from floorwidget.placer.flow import _window_stage
    from floorwidget.placer.options import PlacerOptions
    from floorwidget.placer.stages import soft_mask

    d, fp, f, i = moved
    win = refine_window(d, fp, f, np.array([i]))
    soft = soft_mask(d, f) & win
    assert soft.any()
    opts = PlacerOptions()
    st = _window_stage(d, f, soft, 0.8, opts, 1.0, True)
    g, c = st.grid, d.core
    assert g.nx * g.bw * g.ny * g.bh < 0.5 * (c[2] - c[0]) * (c[3] - c[1])
    r = f.rects()[st.vars]
    assert (r[:, 0] >= g.xlo - 1e-9).all() and (r[:, 2] <= g.xlo + g.nx * g.bw + 1e-9).all()
    assert (r[:, 1] >= g.ylo - 1e-9).all() and (r[:, 3] <= g.ylo + g.ny * g.bh + 1e-9).all()
    full = _window_stage(d, f, soft, 0.8, opts, 1.0, False)
    assert full.grid.xlo == c[0] and full.grid.nx * full.grid.bw == pytest.approx(c[2] - c[0])
