"""The design model: orientations, validation, floorplan copies."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from floorwidget.design import (
    CELL,
    MACRO,
    ORIENT_CODE,
    ORIENTATIONS,
    TERMINAL,
    Design,
    DesignError,
    off_grid,
    orient_mask,
    orient_offsets,
    orient_size,
    snap,
)


def tiny(**kw) -> Design:
    """Two blocks and one net, built directly (invented numbers)."""
    args = dict(name="t", die=(0, 0, 100, 100), names=["a", "b"], kind=[MACRO, CELL],
                width=[20, 2], height=[10, 1], net_start=[0, 2], pin_block=[0, 1],
                pin_dx=[4, 0], pin_dy=[3, 0])
    args.update(kw)
    return Design(**args)


# Expected images of the offset (dx, dy) = (4, 3) from the block centre, worked by hand from the
# orientation definitions of the LEF/DEF language reference (N = R0, S = R180, W = R90
# counter-clockwise, E = R270, FN = MY, FS = MX, FW = MX90, FE = MY90; "MX90" = mirror through
# the x axis, then rotate 90 degrees counter-clockwise):
#   N  (4, 3)      S  (-4, -3)    W  (-3, 4)     E  (3, -4)
#   FN (-4, 3)     FS (4, -3)     FW (3, 4)      FE (-3, -4)
HAND = {"N": (4, 3), "S": (-4, -3), "W": (-3, 4), "E": (3, -4),
        "FN": (-4, 3), "FS": (4, -3), "FW": (3, 4), "FE": (-3, -4)}


@pytest.mark.parametrize("o", ORIENTATIONS)
def test_orientation_offsets_match_the_lefdef_definitions(o):
    x, y = orient_offsets(4.0, 3.0, ORIENT_CODE[o])
    assert (float(x), float(y)) == HAND[o]


def test_orientation_matrices_are_the_dihedral_group():
    # Closed-form property: the eight maps are exactly the symmetries of the square (D4): all
    # distinct, orthogonal, determinant +1 for the rotations and -1 for the mirrored ones.
    pts = [tuple(map(float, orient_offsets(4.0, 3.0, ORIENT_CODE[o]))) for o in ORIENTATIONS]
    assert len(set(pts)) == 8
    for o in ORIENTATIONS:
        c = ORIENT_CODE[o]
        e1 = np.array(orient_offsets(1.0, 0.0, c))
        e2 = np.array(orient_offsets(0.0, 1.0, c))
        m = np.stack([e1, e2], axis=1)
        assert np.allclose(m.T @ m, np.eye(2))
        assert round(np.linalg.det(m)) == (-1 if o.startswith("F") else 1)


def test_footprint_swaps_for_quarter_turns():
    w, h = orient_size(np.full(8, 20.0), np.full(8, 10.0), np.arange(8))
    for o in ORIENTATIONS:
        swapped = o in ("E", "W", "FE", "FW")
        assert (w[ORIENT_CODE[o]], h[ORIENT_CODE[o]]) == ((10, 20) if swapped else (20, 10))


def test_pin_positions_apply_orientation_and_keep_them_on_the_block():
    d = tiny()
    fp = d.initial.copy()
    fp.x[0], fp.y[0] = 30.0, 40.0
    for o in ORIENTATIONS:
        fp.orient[0] = ORIENT_CODE[o]
        px, py = fp.pin_positions()
        r = fp.rects()[0]
        cx, cy = (r[0] + r[2]) / 2, (r[1] + r[3]) / 2
        assert (px[0] - cx, py[0] - cy) == HAND[o]
        assert r[0] <= px[0] <= r[2] and r[1] <= py[0] <= r[3]


def test_validation_lists_every_problem_at_once():
    with pytest.raises(DesignError) as e:
        Design("bad", (0, 0, 100, 100), ["a", "a", "c", "big"], [MACRO, CELL, CELL, MACRO],
               [10, -1, np.nan, 500], [10, 1, 1, 10], [0, 2, 2, 4], [0, 1, 0, 7],
               [0, 0, 60, 0], [0, 0, 0, 0])
    probs = e.value.problems
    text = " | ".join(probs)
    assert "duplicate block names" in text
    assert "non-positive or non-finite size" in text
    assert "macro larger than the die" in text
    assert "empty net" in text
    assert "pins on unknown blocks" in text
    assert len(probs) >= 5
    assert "\n" not in str(e.value)


def test_pin_outside_its_block_is_reported():
    with pytest.raises(DesignError, match="pin outside its block: 'a'"):
        tiny(pin_dx=[11, 0])


def test_terminals_may_be_zero_size_and_pins_anywhere_on_them():
    d = tiny(kind=[TERMINAL, CELL], width=[0, 2], height=[0, 1])
    assert d.num_blocks == 2


def test_single_pin_nets_are_dropped_with_a_warning():
    with warnings.catch_warnings(record=True) as w:
        warnings.simplefilter("always")
        d = tiny(net_start=[0, 1, 3], pin_block=[0, 0, 1], pin_dx=[0, 4, 0], pin_dy=[0, 3, 0],
                 net_names=["lonely", "real"])
    assert any("single-pin" in str(x.message) for x in w)
    assert d.net_names == ["real"] and d.num_pins == 2 and d.net_start.tolist() == [0, 2]


def test_macro_that_fits_only_rotated_is_valid_when_rotation_is_allowed():
    kw = dict(width=[150, 2], height=[50, 1], pin_dx=[0, 0], pin_dy=[0, 0])
    with pytest.raises(DesignError, match="larger than the die"):
        tiny(orient_allowed=[orient_mask(["N", "FN"]), 1], **kw)
    d = tiny(die=(0, 0, 100, 200), orient_allowed=[orient_mask(["N", "W"]), 1], **kw)
    assert d.allowed_orientations("a") == ["N", "W"]


def test_floorplan_copy_is_independent_and_identical():
    d = tiny()
    a = d.initial
    b = a.copy()
    assert b.identical(a)
    b.x[0] += 1.0
    assert not b.identical(a) and a.x[0] == 0.0


def test_snap_and_off_grid():
    v = np.array([0.0, 1.24, 1.26, -0.7])
    s = snap(v, 0.5, 0.5)
    assert s.tolist() == [0.0, 1.0, 1.5, -0.5]
    assert not off_grid(s, 0.5, 0.5).any()
    assert off_grid(v, 0.5, 0.5).tolist() == [False, True, True, True]


def test_design_lookup_errors_name_the_block():
    d = tiny()
    with pytest.raises(KeyError, match="nope"):
        d.initial.position("nope")
    assert d.macros == ["a"]
    assert d.nets_of([1]).tolist() == [0]


def test_pickling_drops_the_name_index_cache():
    import pickle

    d = tiny()
    assert d.block("b") == 1  # builds the cache
    e = pickle.loads(pickle.dumps(d))
    assert e._index is None and e.block("b") == 1
    assert e.initial.identical(d.initial)
