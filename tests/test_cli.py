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
    assert REPORT_KEYS <= set(rep)
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


# ---------------------------------------------------------------------------------------------
# hardening (run in-process through main(): the same code as the console script, faster)

from floorwidget.cli import main  # noqa: E402

LEFDEF = Path(__file__).parent / "data" / "lefdef"


@pytest.mark.parametrize("opt", [["--target-density", "5"], ["--target-density", "0"],
                                 ["--target-density", "nan"], ["--target-density", "inf"],
                                 ["--target-density", "-0.5"], ["--seed", "-1"],
                                 ["--seed", "1.5"], ["--seed", str(2**64)]])
def test_bad_placer_options_exit_2_with_one_line(demo_path, tmp_path, capsys, opt):
    out = tmp_path / "o.json"
    assert main(["place", str(demo_path), "-o", str(out), *opt]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and opt[0] in err[0], err
    assert not out.exists()


def test_library_value_error_is_exit_2(demo_path, tmp_path, capsys, monkeypatch):
    import floorwidget.placer as placer

    def refuse(*a, **k):
        raise ValueError("option 'channel' must be >= 0, got -1")

    monkeypatch.setattr(placer, "place", refuse)
    assert main(["place", str(demo_path), "-o", str(tmp_path / "o.json")]) == 2
    assert "option 'channel'" in capsys.readouterr().err


def test_report_json_is_strict_with_non_finite_values(demo_path, capsys, monkeypatch):
    import floorwidget.metrics as metrics

    real = metrics.evaluate

    def degenerate(design, fp, **kw):
        rep = dict(real(design, fp, **kw))
        rep["density_overflow"], rep["congestion_peak"] = float("nan"), float("inf")
        return rep

    monkeypatch.setattr(metrics, "evaluate", degenerate)
    assert main(["report", str(demo_path), "--json"]) == 0

    def refuse(name):  # RFC 8259 JSON has no NaN or Infinity
        raise AssertionError(f"non-JSON constant {name}")

    rep = json.loads(capsys.readouterr().out, parse_constant=refuse)
    assert rep["density_overflow"] is None and rep["congestion_peak"] is None
    assert main(["report", str(demo_path)]) == 0
    assert "n/a" in capsys.readouterr().out


def test_lef_takes_several_files_and_repeats(tmp_path, capsys):
    lefs = [str(LEFDEF / "kestrel_tech.lef"), str(LEFDEF / "kestrel_cells.lef")]
    outs = []
    for form in (["--lef", *lefs], ["--lef", lefs[0], "--lef", lefs[1]]):
        assert main(["report", str(LEFDEF / "kestrel.def"), *form, "--json"]) == 0, \
            capsys.readouterr().err
        outs.append(json.loads(capsys.readouterr().out))
    assert outs[0] == outs[1] and outs[0]["num_blocks"] > 0


def test_convert_to_def_gz_and_back(tmp_path, capsys):
    lefs = [str(LEFDEF / "kestrel_tech.lef"), str(LEFDEF / "kestrel_cells.lef")]
    out = tmp_path / "k.def.gz"
    assert main(["convert", str(LEFDEF / "kestrel.def"), str(out), "--lef", *lefs]) == 0
    assert main(["convert", str(out), str(tmp_path / "k.json"), "--lef", *lefs]) == 0
    ref = fw.load(LEFDEF / "kestrel.def", lef=lefs)
    assert fw.load(tmp_path / "k.json").initial.identical(ref.initial)


def test_unwritable_output_folder_names_out(demo_path, tmp_path, capsys):
    out = tmp_path / "missing" / "x.aux"
    assert main(["convert", str(demo_path), str(out)]) == 2
    err = capsys.readouterr().err
    assert f"{out}: cannot write" in err and ".tmp" not in err


def test_render_colours_by_hierarchy_and_refuses_a_bad_depth(demo_path, tmp_path):
    out = tmp_path / "h.svg"
    r = run("render", demo_path, "-o", out, "--hierarchy", "1")
    assert r.returncode == 0, r.stderr
    plain = tmp_path / "p.svg"
    assert run("render", demo_path, "-o", plain).returncode == 0
    assert out.read_text() != plain.read_text()  # the hierarchy colours changed the picture
    bad = tmp_path / "bad.svg"
    r = run("render", demo_path, "-o", bad, "--hierarchy", "-1")
    assert r.returncode == 2 and "--hierarchy" in r.stderr and "[0, 64]" in r.stderr
    assert len(r.stderr.strip().splitlines()) == 1 and not bad.exists()
