"""Congestion as demand over supply (1.0 = full): RUDY's demand split by direction over the
tracks of the routing layers.

The demand is RUDY (Spindler, Johannes, DATE 2007): a net's box ``w × h`` carries the density
``(w + h) / (w h)``, of which ``w / (w h) = 1 / h`` runs horizontally and ``1 / w``
vertically.  A layer of pitch ``p`` offers ``1 / p`` µm of track per µm² across its direction
(closed form).  So a lone net's congestion inside its box is ``max((1/h) / Σ_H 1/p,
(1/w) / Σ_V 1/p)``, the lowest layer left out (common practice: it serves the cells' pins).
"""

from __future__ import annotations

import numpy as np
import pytest

from floorwidget import metrics as M
from floorwidget.design import CLUSTER, Floorplan
from tests.test_metrics import make_design


def _two_pin(layers):
    d = make_design([1, 1], [1, 1], [CLUSTER, CLUSTER], [[(0, 0, 0), (1, 0, 0)]])
    d.routing_layers = layers
    fp = Floorplan(d, [19.5, 59.5], [9.5, 29.5])  # centres (20, 10) and (60, 30): 40 x 20
    return d, fp


def test_congestion_is_directional_demand_over_track_supply():
    layers = [("M1", "V", 0.05), ("M2", "H", 0.2), ("M3", "V", 0.25), ("M4", "H", 0.5)]
    d, fp = _two_pin(layers)
    sh, sv, assumed = M.routing_supply(d)
    assert not assumed
    assert sh == pytest.approx(1 / 0.2 + 1 / 0.5) and sv == pytest.approx(1 / 0.25)
    g = M.BinGrid(0.0, 0.0, 10, 10, 10.0, 10.0)
    c = M.congestion_map(d, fp, g)
    want = max((1 / 20) / sh, (1 / 40) / sv)
    np.testing.assert_allclose(c[2:6, 1:3], want)
    assert c.sum() - c[2:6, 1:3].sum() == pytest.approx(0.0)
    # the RUDY of the same net is the sum of the two directions, unchanged
    np.testing.assert_allclose(M.rudy_map(d, fp, g)[2:6, 1:3], (40 + 20) / (40 * 20))


def test_supply_doubles_when_pitches_halve_and_congestion_halves():
    a, fpa = _two_pin([("M1", "V", 0.1), ("M2", "H", 0.2), ("M3", "V", 0.2)])
    b, fpb = _two_pin([("M1", "V", 0.1), ("M2", "H", 0.1), ("M3", "V", 0.1)])
    g = M.BinGrid(0.0, 0.0, 10, 10, 10.0, 10.0)
    np.testing.assert_allclose(M.congestion_map(b, fpb, g), M.congestion_map(a, fpa, g) / 2)


def test_without_layers_the_supply_is_assumed_and_said_so():
    d, fp = _two_pin([])
    sh, sv, assumed = M.routing_supply(d)
    unit = float(np.median(d.row_height)) if len(d.row_height) else \
        0.01 * min(d.core[2] - d.core[0], d.core[3] - d.core[1])
    assert assumed and sh == sv == pytest.approx(M.ASSUMED_TRACKS / unit)
    rep = M.evaluate(d, fp)
    # max(h / s, v / s) lies between (h + v) / 2s and (h + v) / s in every bin
    s = sh
    assert rep["rudy_peak"] / (2 * s) - 1e-12 <= rep["congestion_peak"] <= rep["rudy_peak"] / s


def test_lef_routing_layers_give_the_supply(tmp_path):
    # LEF: "PITCH x y" gives the x pitch of vertical tracks and the y pitch of horizontal ones
    # (LEF/DEF language reference); cut layers and layers without a direction are no supply
    lef = tmp_path / "tech.lef"
    lef.write_text("""VERSION 5.8 ;
UNITS DATABASE MICRONS 1000 ; END UNITS
LAYER M1 TYPE ROUTING ; DIRECTION VERTICAL ; PITCH 0.1 ; END M1
LAYER V1 TYPE CUT ; END V1
LAYER M2 TYPE ROUTING ; DIRECTION HORIZONTAL ; PITCH 0.3 0.2 ; END M2
LAYER M3 TYPE ROUTING ; DIRECTION VERTICAL ; PITCH 0.25 ; END M3
LAYER OVL TYPE MASTERSLICE ; END OVL
END LIBRARY
""")
    from floorwidget.formats.lefdef import read_lef

    lib = read_lef([str(lef)])
    assert lib.layers == [("M1", "V", 0.1), ("M2", "H", 0.2), ("M3", "V", 0.25)]
    d, _ = _two_pin(lib.layers)
    sh, sv, assumed = M.routing_supply(d)
    assert not assumed and sh == pytest.approx(5.0) and sv == pytest.approx(4.0)
