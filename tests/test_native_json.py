"""The native JSON format: exact round trips, errors naming the JSON path, atomic writes."""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import floorwidget as fw
from floorwidget.design import CELL, MACRO, TERMINAL, Design, DesignError
from floorwidget.formats.native_json import to_document


def test_demo_round_trip_is_exact(demo_design, tmp_path):
    out = tmp_path / "again.json"
    fw.save(demo_design, demo_design.initial, out)
    back = fw.load(out)
    assert back.initial.identical(demo_design.initial)
    for attr in ("die", "width", "height", "halo", "orient_allowed", "net_start", "pin_block",
                 "pin_dx", "pin_dy", "net_weight", "row_y", "grid_pitch", "blockages"):
        assert np.array_equal(getattr(back, attr), getattr(demo_design, attr)), attr
    assert back.names == demo_design.names and back.net_names == demo_design.net_names


finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, allow_infinity=False)
size = st.floats(min_value=1e-3, max_value=50, allow_nan=False)


@st.composite
def designs(draw):
    n = draw(st.integers(2, 8))
    kind = draw(st.lists(st.sampled_from([MACRO, CELL, TERMINAL]), min_size=n, max_size=n))
    w = draw(st.lists(size, min_size=n, max_size=n))
    h = draw(st.lists(size, min_size=n, max_size=n))
    m = draw(st.integers(1, 5))
    starts, pb, dx, dy = [0], [], [], []
    for _ in range(m):
        deg = draw(st.integers(2, n))
        members = draw(st.permutations(range(n)))[:deg]
        for b in members:
            fx = draw(st.floats(-0.5, 0.5))
            fy = draw(st.floats(-0.5, 0.5))
            pb.append(b)
            dx.append(fx * w[b])
            dy.append(fy * h[b])
        starts.append(len(pb))
    x = draw(st.lists(finite, min_size=n, max_size=n))
    y = draw(st.lists(finite, min_size=n, max_size=n))
    orient = draw(st.lists(st.integers(0, 7), min_size=n, max_size=n))
    status = draw(st.lists(st.integers(0, 2), min_size=n, max_size=n))
    weight = draw(st.lists(st.floats(0, 10), min_size=m, max_size=m))
    return Design("h", (0, 0, 100.5, 100.25), [f"b{i}" for i in range(n)], kind, w, h, starts,
                  pb, dx, dy, net_weight=weight, x=x, y=y, orient=orient, status=status,
                  grid_pitch=(0.1, 0.3))


@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(designs())
def test_round_trip_is_exact_for_any_floats(tmp_path, d):
    # Python's float repr is the shortest string that reads back to the same double
    # (Steele & White / Gay, "Correctly rounded binary-decimal conversions", 1990), so every
    # value must come back bit-identical.
    p = tmp_path / "h.json"
    fw.save(d, d.initial, p)
    e = fw.load(p)
    assert e.initial.identical(d.initial)
    for attr in ("width", "height", "pin_dx", "pin_dy", "net_weight", "grid_pitch"):
        assert np.array_equal(getattr(e, attr), getattr(d, attr)), attr


def _doc(demo_design):
    return json.loads(json.dumps(to_document(demo_design, demo_design.initial)))


@pytest.mark.parametrize("path,value,expect", [
    (("blocks", 3, "width"), "wide", "blocks[3].width: expected a number"),
    (("blocks", 0, "kind"), "rock", "blocks[0].kind: expected one of"),
    (("blocks", 5, "orient"), "NE", "blocks[5].orient"),
    (("nets", 2, "pins", 1, 0), "ghost", "nets[2].pins[1][0]: unknown block"),
    (("rows", 4, "num_sites"), -3, "rows[4].num_sites"),
    (("die",), [0, 0, 1], "die: expected a list of 4 numbers"),
    (("version",), 99, "version"),
    # hardening: counts and sizes beyond any real design are refused before numpy sees them
    (("rows", 0, "num_sites"), 10**30, "rows[0].num_sites: expected a whole number"),
    (("rows", 0, "num_sites"), 10**20, "rows[0].num_sites: expected a whole number"),
    (("dbu",), 10**40, "dbu: expected a whole number"),
    (("blocks", 3, "width"), 10**400, "blocks[3].width: not a finite number"),
    (("die",), [-1e308, -1e308, 1e308, 1e308], "die [-1e+308"),
    (("blocks", 1, "x"), 1e300, "position (1e+300"),
])
def test_errors_name_the_json_path(demo_design, tmp_path, path, value, expect):
    doc = _doc(demo_design)
    node = doc
    for k in path[:-1]:
        node = node[k]
    node[path[-1]] = value
    p = tmp_path / "bad.json"
    p.write_text(json.dumps(doc))
    with pytest.raises(DesignError) as e:
        fw.load(p)
    assert str(p) in str(e.value) and expect in str(e.value)
    assert e.value.line is not None or e.value.where  # a line or an object, always


def test_syntax_error_names_the_line(tmp_path):
    p = tmp_path / "broken.json"
    p.write_text('{\n  "format": "floorwidget-design",\n  "version": 1,\n  oops\n}\n')
    with pytest.raises(DesignError, match=r"broken.json:4: invalid JSON"):
        fw.load(p)


def test_failed_write_leaves_the_old_file(demo_design, tmp_path, monkeypatch):
    p = tmp_path / "keep.json"
    fw.save(demo_design, demo_design.initial, p)
    before = p.read_bytes()

    import floorwidget.formats.native_json as nj

    def boom(doc, f):
        f.write("{ partial")
        raise RuntimeError("disk full")

    monkeypatch.setattr(nj, "_dump", boom)
    with pytest.raises(RuntimeError):
        fw.save(demo_design, demo_design.initial, p)
    assert p.read_bytes() == before
    assert sorted(x.name for x in tmp_path.iterdir()) == ["keep.json"]


def test_unknown_suffix_is_a_design_error(demo_design, tmp_path):
    with pytest.raises(DesignError, match="unknown output format"):
        fw.save(demo_design, None, tmp_path / "x.txt")
    with pytest.raises(DesignError, match="unknown design format"):
        fw.load(tmp_path / "x.txt")
    with pytest.raises(DesignError, match="file not found"):
        fw.load(tmp_path / "missing.json")


@pytest.mark.parametrize("text, line", [
    ("[" * 1000 + "]" * 1000, 1),                       # RecursionError before
    ('{"format": "floorwidget-design",\n "x": ' + "[" * 3000 + "]" * 3000 + "}", 2),
])
def test_deep_nesting_is_refused_with_its_line(tmp_path, text, line):
    p = tmp_path / "deep.json"
    p.write_text(text)
    with pytest.raises(DesignError, match="nested more than") as e:
        fw.load(p)
    assert e.value.file == str(p) and e.value.line == line


def test_integer_of_5000_digits_is_a_field_error(demo_design, tmp_path):
    # Python refuses int() of more than 4300 digits (ValueError before)
    text = json.dumps(_doc(demo_design)).replace('"width": 1', '"width": 1' + "0" * 5000, 1)
    p = tmp_path / "long.json"
    p.write_text(text)
    with pytest.raises(DesignError, match=r"blocks\[\d+\]\.width: not a finite number"):
        fw.load(p)


def test_byte_order_mark_is_accepted(demo_design, tmp_path):
    p = tmp_path / "bom.json"
    p.write_bytes(b"\xef\xbb\xbf" + json.dumps(_doc(demo_design)).encode())
    assert fw.load(p).initial.identical(demo_design.initial)


def test_macro_orientation_outside_its_allowed_set_is_refused(demo_design, tmp_path):
    doc = _doc(demo_design)
    k = next(i for i, b in enumerate(doc["blocks"]) if b["kind"] == "macro")
    doc["blocks"][k]["orientations"] = ["N", "FS"]
    doc["blocks"][k]["orient"] = "E"
    p = tmp_path / "o.json"
    p.write_text(json.dumps(doc))
    with pytest.raises(DesignError, match="initial orientation E is not one of") as e:
        fw.load(p)
    assert e.value.where == f"block {doc['blocks'][k]['name']!r}"


@pytest.mark.parametrize("suffix", [".gz", ".bz2"])
def test_compressed_json_round_trip(demo_design, tmp_path, suffix):
    p = tmp_path / f"d.json{suffix}"
    fw.save(demo_design, demo_design.initial, p)
    assert not p.read_bytes().startswith(b"{")
    assert fw.load(p).initial.identical(demo_design.initial)
