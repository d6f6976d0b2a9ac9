"""The report counts partial blockages whose cell fill passes their cap (and ``legal`` says
no): the fill is the share of the blockage's area the cells cover, by shapely."""

from __future__ import annotations

import numpy as np
from shapely import box
from shapely.ops import unary_union

from floorwidget import metrics as M
from floorwidget.design import CELL, Floorplan
from tests.test_metrics import make_design


def test_blockage_over_cap_is_reported():
    n = 10
    d = make_design([2.0] * n, [2.0] * n, [CELL] * n, [[(0, 0, 0), (1, 0, 0)]],
                    blockages=[[0, 0, 10, 10], [50, 50, 60, 60]])
    d = d.derive(blockages=d.blockages, blockage_max_density=[0.2, 0.5])
    # five cells of 4 µm² in the first blockage (20 of its 100 µm²), five in the second
    x = np.r_[np.arange(5) * 2.0, 50 + np.arange(5) * 2.0]
    y = np.r_[np.zeros(5), np.full(5, 50.0)]
    fp = Floorplan(d, x, y)
    shares = [unary_union([box(*r) for r in fp.rects()]).intersection(box(*b)).area / 100
              for b in d.blockages]
    assert shares == [0.2, 0.2]
    assert M.blockages_over_cap(d, fp) == 0  # at the cap is within it
    moved = Floorplan(d, np.r_[np.arange(5) * 2.0, [0, 2, 4, 6, 8]], np.r_[np.zeros(5),
                                                                           np.full(5, 2.0)])
    # ten cells in the first: 40 % of it against a cap of 20 %
    assert M.blockages_over_cap(d, moved) == 1
    rep = M.evaluate(d, moved)
    assert rep["blockages_over_cap"] == 1 and not rep["legal"]
