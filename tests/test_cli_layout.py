"""``floorwidget place --macro-layout/--channel``: the options reach the placer, bad values
exit 2 with one line."""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

import floorwidget as fw
from floorwidget.synth import rent_design


def run(*args):
    return subprocess.run([sys.executable, "-m", "floorwidget.cli", *map(str, args)],
                          capture_output=True, text=True, timeout=300)


@pytest.fixture(scope="module")
def small(tmp_path_factory):
    d = rent_design(600, num_macros=6, seed=3)
    path = tmp_path_factory.mktemp("layout") / "small.json"
    fw.save(d, d.initial, path)
    return fw.load(path), path


@pytest.mark.parametrize("layout,channel", [("periphery", None), ("free", 6.0)])
def test_place_passes_macro_layout_and_channel(small, tmp_path, layout, channel):
    d, path = small
    out = tmp_path / "out.json"
    extra = [] if channel is None else ["--channel", channel]
    r = run("place", path, "-o", out, "--macro-layout", layout, *extra, "--json")
    assert r.returncode == 0, r.stderr
    want = fw.place(d, seed=0, macro_layout=layout, channel=channel)
    got = fw.load(out).initial
    assert np.allclose(got.x, want.x) and np.allclose(got.y, want.y)
    rep = json.loads(r.stdout)
    assert rep["narrow_channels"] == fw.evaluate(d, want, channel=channel)["narrow_channels"]
    assert {"macros_facing_wall", "logic_regions", "largest_logic_region"} <= set(rep)


@pytest.mark.parametrize("args,needle", [
    (["--macro-layout", "diagonal"], "--macro-layout"),
    (["--channel", "-1"], "--channel"),
    (["--channel", "nan"], "--channel"),
    (["--channel", "wide"], "--channel"),
])
def test_bad_layout_options_exit_2_with_one_line(small, tmp_path, args, needle):
    _, path = small
    out = tmp_path / "out.json"
    r = run("place", path, "-o", out, *args)
    assert r.returncode == 2 and not out.exists()
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and needle in lines[0] and "Traceback" not in r.stderr
