"""Orientation tables and wirelength-driven orientation choice, checked from outside.

* The rotate/flip maps are checked against the LEF/DEF orientation definitions worked by hand
  (LEF/DEF Language Reference: N = R0, W = R90 counter-clockwise, S = R180, E = R270,
  FN = MY, FS = MX, FW = MX90, FE = MY90) and against the presentation of the dihedral group
  D4 = <r, s | r^4 = s^2 = 1, s r s = r^-1> (any algebra text, e.g. Dummit, Foote, "Abstract
  Algebra", 3rd ed., 2004, sec. 1.2).
* The choice is checked against a brute-force HPWL written here from the definition
  (half-perimeter of each net's pin bounding box): no single macro can improve by changing its
  orientation, and the reported gain equals the brute-force drop.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from floorwidget.design import (
    ALL_ORIENTS,
    MACRO,
    MOVABLE,
    ORIENT_CODE,
    ORIENTATIONS,
    PINNED,
    TERMINAL,
    Design,
    orient_mask,
)
from floorwidget.placer.orient import choose_orientations, flipped, orient_matrix, rotated

C = ORIENT_CODE

# --- hand-worked from the LEF/DEF definitions -------------------------------------------------
# A further quarter turn counter-clockwise (R90) applied after an orientation:
#   N (R0)    -> R90            = W
#   W (R90)   -> R180           = S
#   S (R180)  -> R270           = E
#   E (R270)  -> R360           = N
#   FN (MY: (x,y)->(-x,y))   then R90 ((x,y)->(-y,x)):  (x,y)->(-y,-x) = FE (MY90)
#   FE ((x,y)->(-y,-x))      then R90:                  (x,y)->( x,-y) = FS (MX)
#   FS ((x,y)->(x,-y))       then R90:                  (x,y)->( y, x) = FW (MX90)
#   FW ((x,y)->(y,x))        then R90:                  (x,y)->(-x, y) = FN
# A mirror about the vertical axis (MY) applied after an orientation:
#   N -> FN, FN -> N;  S (R180) then MY: (x,y)->(x,-y) = FS;  W then MY = FW;  E then MY = FE.
HAND_ROT = {"N": "W", "W": "S", "S": "E", "E": "N", "FN": "FE", "FE": "FS", "FS": "FW",
            "FW": "FN"}
HAND_FLIP = {"N": "FN", "FN": "N", "S": "FS", "FS": "S", "W": "FW", "FW": "W", "E": "FE",
             "FE": "E"}
R90 = np.array([[0.0, -1.0], [1.0, 0.0]])  # counter-clockwise quarter turn, by hand
MY = np.array([[-1.0, 0.0], [0.0, 1.0]])  # mirror about the vertical axis, by hand


@pytest.mark.parametrize("o", ORIENTATIONS)
def test_rotate_and_flip_follow_the_lef_def_definitions(o):
    assert ORIENTATIONS[rotated(C[o])] == HAND_ROT[o]
    assert ORIENTATIONS[flipped(C[o])] == HAND_FLIP[o]
    # and the geometry owner agrees: the matrix of rotated(o) is R90 times that of o
    assert np.array_equal(orient_matrix(rotated(C[o])), R90 @ orient_matrix(C[o]))
    assert np.array_equal(orient_matrix(flipped(C[o])), MY @ orient_matrix(C[o]))


def test_rotate_and_flip_generate_the_dihedral_group_d4():
    def r(c, k=1):
        for _ in range(k):
            c = rotated(c)
        return c

    for c in range(8):
        assert r(c, 4) == c  # r^4 = 1
        assert r(c, 1) != c and r(c, 2) != c  # r has order exactly 4
        assert flipped(flipped(c)) == c  # s^2 = 1
        assert flipped(r(flipped(c))) == r(c, 3)  # s r s = r^-1
    # the eight words r^k, s r^k reach eight distinct orientations from N (|D4| = 8)
    words = {r(C["N"], k) for k in range(4)} | {flipped(r(C["N"], k)) for k in range(4)}
    assert words == set(range(8))


def test_rotate_and_flip_respect_allowed_orientations():
    ns = orient_mask(["N", "S"])
    assert rotated(C["N"], ns) == C["S"] and rotated(C["S"], ns) == C["N"]
    assert flipped(C["N"], ns) == C["N"]  # mirror not allowed: unchanged
    nfn = orient_mask(["N", "FN"])
    assert flipped(C["N"], nfn) == C["FN"] and rotated(C["FN"], nfn) == C["FN"]
    assert rotated(C["E"], ALL_ORIENTS) == C["N"]


# --- brute-force HPWL from the definition -------------------------------------------------------


def _hpwl(d: Design, fp, weighted=True) -> float:
    px, py = fp.pin_positions()
    s = d.net_start[:-1]
    span = (np.maximum.reduceat(px, s) - np.minimum.reduceat(px, s)
            + np.maximum.reduceat(py, s) - np.minimum.reduceat(py, s))
    return float((span * (d.net_weight if weighted else 1.0)).sum())


def _with(fp, i, code):
    g = fp.copy()
    cx, cy = fp.centres()
    g.orient[i] = code
    w, h = g.sizes()
    g.x[i], g.y[i] = cx[i] - w[i] / 2, cy[i] - h[i] / 2
    return g


def _assert_locally_optimal(d, out, tol=1e-6):
    base = _hpwl(d, out)
    for i in np.flatnonzero((d.kind == MACRO) & (out.status == MOVABLE)):
        for c in range(8):
            if d.orient_allowed[i] >> c & 1:
                assert _hpwl(d, _with(out, i, c)) >= base - tol * max(1.0, base), (
                    f"{d.names[i]} would improve in {ORIENTATIONS[c]}")


def test_pins_on_the_west_edge_turn_to_face_partners_in_the_east():
    # Macro M, 100 x 40, centre (200, 200); three pins on its west edge (dx = -50) in N.
    # Partners: terminals far to the east at x = 900.  By hand: FN maps (-50, dy) -> (50, dy)
    # and S maps it to (50, -dy): both put the pins on the east edge, 100 µm nearer the
    # partners on each of three nets (gain 300 µm); E/W/FE/FW put them on the north/south
    # edge (gain 150 µm) and FS keeps them west.
    names = ["M", "T0", "T1", "T2"]
    kind = [MACRO, TERMINAL, TERMINAL, TERMINAL]
    dys = [-10.0, 0.0, 10.0]
    pin_block, pin_dx, pin_dy, start = [], [], [], [0]
    for k, dy in enumerate(dys):
        pin_block += [0, 1 + k]
        pin_dx += [-50.0, 0.0]
        pin_dy += [dy, 0.0]
        start.append(len(pin_block))
    d = Design("west", (0, 0, 1000, 400), names, kind, [100.0, 0, 0, 0], [40.0, 0, 0, 0],
               start, pin_block, pin_dx, pin_dy,
               x=[150.0, 900.0, 900.0, 900.0], y=[180.0, 190.0, 200.0, 210.0],
               status=[MOVABLE, 2, 2, 2])
    fp = d.initial
    before = _hpwl(d, fp)
    out = choose_orientations(d, fp)
    assert out.orientation("M") in ("FN", "S")
    px, _ = out.pin_positions()
    assert np.all(px[np.array(pin_block) == 0] == 250.0)  # east edge: centre 200 + 50
    assert out.centres()[0][0] == 200.0 and out.centres()[1][0] == 200.0
    assert before - _hpwl(d, out) == pytest.approx(300.0)
    assert out.info["orient_gain"] == pytest.approx(300.0)
    # only N and FS allowed: nothing faces east, FS keeps the pins west -> stays N (tie)
    d2 = Design("west2", d.die, names, kind, d.width, d.height, start, pin_block, pin_dx,
                pin_dy, orient_allowed=[orient_mask(["N", "FS"]), 1, 1, 1],
                x=fp.x, y=fp.y, status=fp.status)
    assert choose_orientations(d2, d2.initial).orientation("M") == "N"


def test_demo_design_choice_is_locally_optimal_and_leaves_the_rest(demo_design):
    d = demo_design
    fp = d.initial.copy()
    # spread the macros so that orientation matters (the demo starts them stacked)
    mac = np.flatnonzero(d.kind == MACRO)
    rng = np.random.default_rng(5)
    fp.x[mac] = rng.uniform(100, 2000, len(mac))
    fp.y[mac] = rng.uniform(100, 1600, len(mac))
    fp.status[mac[:3]] = PINNED
    fp.orient[mac[1]] = C["S"]
    snap = [a.copy() for a in (fp.x, fp.y, fp.orient, fp.status)]
    out = choose_orientations(d, fp)
    assert all(np.array_equal(a, b) for a, b in zip((fp.x, fp.y, fp.orient, fp.status), snap))
    _assert_locally_optimal(d, out)
    assert _hpwl(d, fp) - _hpwl(d, out) == pytest.approx(out.info["orient_gain"], rel=1e-9)
    stay = np.ones(d.num_blocks, bool)
    stay[mac[3:]] = False
    assert np.array_equal(out.x[stay], fp.x[stay]) and np.array_equal(out.orient[stay],
                                                                       fp.orient[stay])
    # centres kept; allowed orientations only; deterministic
    cx0, cy0 = fp.centres()
    cx1, cy1 = out.centres()
    assert np.allclose(cx0, cx1, atol=1e-9) and np.allclose(cy0, cy1, atol=1e-9)
    assert all(d.orient_allowed[i] >> out.orient[i] & 1 for i in mac[3:])
    assert choose_orientations(d, fp).identical(out)
    # swap=False keeps every footprint
    keep = choose_orientations(d, fp, swap=False)
    assert np.array_equal(keep.sizes()[0], fp.sizes()[0])
    assert np.array_equal(keep.x, fp.x) and np.array_equal(keep.y, fp.y)


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2**32 - 1), n_mac=st.integers(1, 12), n_net=st.integers(1, 40))
def test_random_netlists_gain_is_exact_and_result_locally_optimal(seed, n_mac, n_net):
    rng = np.random.default_rng(seed)
    n_term = 6
    n = n_mac + n_term
    w = np.r_[rng.uniform(10, 80, n_mac).round(1), np.zeros(n_term)]
    h = np.r_[rng.uniform(10, 80, n_mac).round(1), np.zeros(n_term)]
    kind = np.r_[np.full(n_mac, MACRO), np.full(n_term, TERMINAL)]
    start, pb, pdx, pdy = [0], [], [], []
    for _ in range(n_net):
        deg = int(rng.integers(2, 6))
        blocks = rng.integers(0, n, deg)
        if len(set(blocks.tolist())) < 2:
            blocks[1] = (blocks[0] + 1) % n
        for b in blocks:
            pb.append(int(b))
            pdx.append(float(rng.uniform(-w[b] / 2, w[b] / 2)))
            pdy.append(float(rng.uniform(-h[b] / 2, h[b] / 2)))
        start.append(len(pb))
    allowed = np.r_[rng.integers(1, 256, n_mac), np.ones(n_term)]
    orient0 = [int(rng.choice([c for c in range(8) if int(allowed[i]) >> c & 1]))
               for i in range(n_mac)] + [0] * n_term
    d = Design("r", (0, 0, 1000, 1000), [f"b{i}" for i in range(n)], kind, w, h, start, pb,
               pdx, pdy, orient_allowed=allowed, net_weight=rng.uniform(0.5, 2, n_net),
               x=rng.uniform(0, 900, n), y=rng.uniform(0, 900, n), orient=orient0,
               status=np.r_[np.zeros(n_mac), np.full(n_term, 2)])
    fp = d.initial
    out = choose_orientations(d, fp)
    _assert_locally_optimal(d, out)
    assert _hpwl(d, fp) - _hpwl(d, out) == pytest.approx(out.info["orient_gain"], rel=1e-9,
                                                            abs=1e-6)
