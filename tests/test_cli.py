"""The ``floorwidget`` command line, run as a real subprocess: exit codes, one-line errors,
atomic outputs."""

from __future__ import annotations

import json
import subprocess
import sys
from pathlib import Path

import pytest

import floorwidget as fw

REPORT_KEYS = {"hpwl", "hpwl_weighted", "density_overflow", "peak_density", "congestion_peak",
               "congestion_p99", "macro_overlaps", "macro_overlap_area", "out_of_die",
               "off_grid", "legal", "num_blocks", "num_nets"}


def run(*args, cwd=None):
    return subprocess.run([sys.executable, "-m", "floorwidget.cli", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, timeout=300)


def test_report_json_prints_every_key(demo_path, demo_design):
    r = run("report", demo_path, "--json")
    assert r.returncode == 0, r.stderr
    rep = json.loads(r.stdout)
    assert set(rep) == REPORT_KEYS
    assert rep["num_blocks"] == demo_design.num_blocks
    assert rep["num_nets"] == demo_design.num_nets


def test_report_text_carries_the_estimate_caution(demo_path):
    r = run("report", demo_path)
    assert r.returncode == 0, r.stderr
    assert "HPWL" in r.stdout and "early-floorplanning estimates" in r.stdout


def test_convert_json_to_json_is_identical(demo_path, demo_design, tmp_path):
    out = tmp_path / "copy.json"
    r = run("convert", demo_path, out)
    assert r.returncode == 0, r.stderr
    assert fw.load(out).initial.identical(demo_design.initial)


@pytest.mark.parametrize("content,needle", [
    ('{"format": "floorwidget-design", "version": 1,\n oops}', "bad.json:2:"),
    ('{"format": "something-else", "version": 1}', "bad.json: format"),
    ("\x00\x01\x02", "bad.json:1: binary data"),
])
def test_bad_input_exits_2_with_one_line_and_no_output(tmp_path, content, needle):
    bad = tmp_path / "bad.json"
    bad.write_text(content)
    out = tmp_path / "out.json"
    r = run("convert", bad, out)
    assert r.returncode == 2
    lines = r.stderr.strip().splitlines()
    assert len(lines) == 1 and needle in lines[0], r.stderr
    assert "Traceback" not in r.stderr
    assert not out.exists()
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.json"]


def test_missing_file_and_bad_flags_exit_2(tmp_path):
    r = run("report", tmp_path / "nope.json")
    assert r.returncode == 2 and "nope.json: file not found" in r.stderr
    r = run("place", tmp_path / "nope.json")  # no -o
    assert r.returncode == 2 and len(r.stderr.strip().splitlines()) == 1
    r = run("convert", tmp_path / "nope.json", tmp_path / "x.xyz")
    assert r.returncode == 2


def test_unwritable_output_directory_exits_2(demo_path, tmp_path):
    r = run("convert", demo_path, tmp_path / "no" / "such" / "dir.json")
    assert r.returncode == 2 and "does not exist" in r.stderr


@pytest.mark.slow
def test_place_writes_a_legal_floorplan_and_reports_it(demo_path, tmp_path):
    out = tmp_path / "placed.json"
    r = run("place", demo_path, "-o", out, "--seed", "3", "--json")
    assert r.returncode == 0, r.stderr
    rep = json.loads(r.stdout)
    placed = fw.load(out)
    # the report printed is the report of the file written (recomputed independently)
    again = fw.evaluate(placed, placed.initial)
    assert rep["hpwl"] == pytest.approx(again["hpwl"], rel=1e-12)
    assert rep["legal"] and again["legal"]
    pl = tmp_path / "placed.pl"
    r = run("convert", out, pl)
    assert r.returncode == 0, r.stderr
    assert pl.read_text().count("\n") >= placed.num_blocks


def test_the_console_script_is_installed(demo_path):
    script = Path(sys.executable).with_name("floorwidget")
    r = subprocess.run([str(script), "report", str(demo_path), "--json"], capture_output=True,
                       text=True, timeout=120)
    assert r.returncode == 0 and json.loads(r.stdout)["num_nets"] > 0
