"""Bookshelf reader and writer: a hand-worked benchmark, round trips, every malformed-input class
with its file and line, a mutation property, and a networkx cross-check of the netlist."""

from __future__ import annotations

import shutil
import tempfile
import warnings
from collections import Counter
from pathlib import Path

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.sparse.csgraph import connected_components

import floorwidget as fw
from floorwidget.design import CELL, FIXED, MACRO, MOVABLE, PINNED, TERMINAL, DesignError
from floorwidget.formats.bookshelf import read_aux, read_pl, write_aux, write_pl
from floorwidget.synth import rent_design

DATA = Path(__file__).parent / "data" / "bookshelf"
SUFFIXES = (".aux", ".nodes", ".nets", ".wts", ".pl", ".scl")


@pytest.fixture
def tiny(tmp_path) -> Path:
    for s in SUFFIXES:
        shutil.copy(DATA / f"tiny{s}", tmp_path / f"tiny{s}")
    return tmp_path / "tiny.aux"


# ---------------------------------------------------------------------------------------------
# the hand-made benchmark


def test_tiny_reads_as_documented():
    d = read_aux(DATA / "tiny.aux")
    assert d.names == ["a", "b", "c", "m1", "p1", "p2"]
    assert d.kind.tolist() == [CELL, CELL, CELL, MACRO, TERMINAL, TERMINAL]
    assert d.initial.status.tolist() == [MOVABLE] * 4 + [FIXED] * 2
    assert d.die.tolist() == [0, 0, 20, 8]                 # the rows; the pads lie on them
    assert d.grid_pitch.tolist() == [1, 2]                 # site spacing x row height
    assert d.row_orient.tolist() == [0, 5, 0, 5]           # N, FS
    assert d.net_names == ["n1", "n2", "n3", "n4"]
    assert d.net_weight.tolist() == [1, 1, 2, 1]           # from tiny.wts ("a 1" is a node)
    assert d.net_degree.tolist() == [2, 3, 3, 2]
    assert d.initial.orientation("c") == "FS"
    assert d.allowed_orientations("m1") == list(fw.ORIENTATIONS)


def test_tiny_hpwl_by_hand():
    """Worked by hand from tiny.pl / tiny.nets (offsets from the centre, FS mirrors y).

    Centres: a (2, 1), b (8, 3), c (11.5, 1) in FS, m1 (15, 6), p1 (0, 5), p2 (20, 1).
    n1: a+(0.5, 0.5) = (2.5, 1.5), b+(-1, 0) = (7, 3)           -> 4.5 + 1.5 = 6
    n2: b+(1, 0.5) = (9, 3.5), c+(0, -0.5) = (11.5, 0.5),
        m1+(-3, -1) = (12, 5)                                   -> 3 + 4.5 = 7.5
    n3: p1 (0, 5), a (2, 1), m1+(2, 1.5) = (17, 7.5)             -> 17 + 6.5 = 23.5
    n4: p2 (20, 1), c+(1, -0) = (12.5, 1)                       -> 7.5 + 0 = 7.5
    Total 44.5; with n3 weighted 2: 68.
    """
    from floorwidget.metrics import evaluate, hpwl, net_hpwl

    d = read_aux(DATA / "tiny.aux")
    fp = d.initial
    px, py = fp.pin_positions()
    assert px.tolist() == [2.5, 7, 9, 11.5, 12, 0, 2, 17, 20, 12.5]
    assert py.tolist() == [1.5, 3, 3.5, 0.5, 5, 5, 1, 7.5, 1, 1]
    assert net_hpwl(d, fp).tolist() == [6.0, 7.5, 23.5, 7.5]
    assert hpwl(d, fp) == 44.5
    assert hpwl(d, fp, weighted=True) == 68.0
    rep = evaluate(d, fp)
    assert rep["hpwl"] == 44.5 and rep["hpwl_weighted"] == 68.0


def test_load_dispatches_aux_and_save_writes_pl(tiny, tmp_path):
    d = fw.load(tiny)
    fp = d.initial.copy()
    fp.x[0] = 3.0
    fw.save(d, fp, tmp_path / "moved.pl")
    back = read_pl(d, tmp_path / "moved.pl")
    assert back.position("a") == (3.0, 0.0)


# ---------------------------------------------------------------------------------------------
# round trips


def _placed(n=1500, macros=6, seed=3):
    d = rent_design(n, num_macros=macros, seed=seed)
    rng = np.random.default_rng(seed)
    fp = d.initial.copy()
    mov = fp.status == MOVABLE
    fp.x[mov] = rng.random(mov.sum()) * (d.die[2] - 20)
    fp.y[mov] = rng.random(mov.sum()) * (d.die[3] - 20)
    mac = np.flatnonzero(d.kind == MACRO)
    fp.orient[mac] = rng.integers(0, 8, len(mac))
    fp.status[mac[:2]] = PINNED
    return d, fp


def test_round_trip_write_aux_read_aux(tmp_path):
    d, fp = _placed()
    d.net_weight[:] = np.random.default_rng(0).integers(1, 5, d.num_nets) / 2
    aux = write_aux(d, fp, tmp_path)
    assert aux == tmp_path / f"{d.name}.aux"
    e = read_aux(aux)
    assert e.names == d.names
    assert e.kind.tolist() == d.kind.tolist()
    for a in ("width", "height", "net_start", "pin_block", "pin_dx", "pin_dy", "net_weight",
              "row_x", "row_y", "row_height", "row_site_width", "row_num_sites", "row_orient",
              "die", "grid_pitch", "grid_origin"):
        assert np.array_equal(getattr(e, a), getattr(d, a)), a
    assert e.net_names == d.net_names
    g = e.initial
    assert np.array_equal(g.x, fp.x) and np.array_equal(g.y, fp.y)
    assert np.array_equal(g.orient, fp.orient)
    want = np.where(fp.status == MOVABLE, MOVABLE, FIXED)       # pinned is written /FIXED
    assert np.array_equal(g.status, want)
    mac = d.kind == MACRO
    assert (e.orient_allowed[mac] == 0xFF).all()
    # from the first re-read on, a trip is the identity on the files (pinned became fixed)
    aux2 = write_aux(e, g, tmp_path / "again.aux")
    e2 = read_aux(aux2)
    aux3 = write_aux(e2, e2.initial, tmp_path / "third.aux")
    for s in (".nodes", ".nets", ".pl", ".scl", ".wts"):
        assert aux3.with_suffix(s).read_text() == aux2.with_suffix(s).read_text()


def test_round_trip_write_pl_read_pl(tmp_path):
    d, fp = _placed(400, 3, seed=5)
    write_pl(d, fp, tmp_path / "p.pl")
    g = read_pl(d, tmp_path / "p.pl")
    assert np.array_equal(g.x, fp.x) and np.array_equal(g.y, fp.y)
    assert np.array_equal(g.orient, fp.orient)
    assert (g.status[fp.status != MOVABLE] == FIXED).all()
    assert (g.status[fp.status == MOVABLE] == MOVABLE).all()


def test_round_trip_of_the_demo_design_keeps_the_netlist(demo_design, tmp_path):
    d = demo_design
    e = read_aux(write_aux(d, None, tmp_path))
    assert e.names == d.names
    for a in ("width", "height", "net_start", "pin_block", "pin_dx", "pin_dy"):
        assert np.array_equal(getattr(e, a), getattr(d, a)), a
    assert np.array_equal(e.initial.x, d.initial.x)


def test_writer_refuses_unwritable_names_and_leaves_nothing(tmp_path):
    d = rent_design(50, seed=0)
    d.names[3] = "has space"
    with pytest.raises(DesignError, match="has space"):
        write_aux(d, None, tmp_path)
    assert list(tmp_path.iterdir()) == []
    with pytest.raises(DesignError, match="has space"):
        write_pl(d, d.initial, tmp_path / "x.pl")
    assert list(tmp_path.iterdir()) == []


# ---------------------------------------------------------------------------------------------
# malformed input: one case per class, each with the file and line it must name


def _edit(path: Path, old: str, new: str) -> None:
    text = path.read_text()
    if old.startswith("<cut "):  # drop the last k lines
        k = int(old[5:-1])
        path.write_text("".join(text.splitlines(keepends=True)[:-k]) + new)
        return
    assert old in text, old
    path.write_text(text.replace(old, new, 1))


def _line_count(path: Path) -> int:
    return len(path.read_text().splitlines())


BAD = {
    # class: (file, old, new, expected line or None = last line, words in the message)
    "NumNodes count": ("nodes", "NumNodes : 6", "NumNodes : 7", 3, "NumNodes says 7"),
    "NumTerminals count": ("nodes", "NumTerminals : 2", "NumTerminals : 1", 4, "NumTerminals"),
    "NumNets count": ("nets", "NumNets : 4", "NumNets : 5", 2, "NumNets says 5"),
    "NumPins count": ("nets", "NumPins : 10", "NumPins : 9", 3, "NumPins says 9"),
    "net degree too large": ("nets", "NetDegree : 2 n1", "NetDegree : 3 n1", 5, "NetDegree"),
    "net degree too small": ("nets", "NetDegree : 3 n2", "NetDegree : 2 n2", 8, "NetDegree"),
    "truncated nets": ("nets", "<cut 1>", "", None, "file ends"),
    "truncated scl": ("scl", "<cut 2>", "", None, "file ends"),
    "row without End": ("scl", "NumSites : 20\nEnd\n", "NumSites : 20\n", 12, "no End"),
    "truncated node line": ("nodes", "m1  6 4", "m1  6", 9, "expected"),
    "unknown node in nets": ("nets", "  b I : -1 0", "  zz I : -1 0", 7, "unknown node 'zz'"),
    "unknown node in pl": ("pl", "b   6  2 : N", "q   6  2 : N", 4, "unknown node 'q'"),
    "negative size": ("nodes", "b   4 2", "b   -4 2", 7, "negative"),
    "NaN size": ("nodes", "a   2 2", "a   nan 2", 6, "not a finite number"),
    "inf position": ("pl", "c  10  0 : FS", "c  inf  0 : FS", 5, "not a finite number"),
    "inf pin offset": ("nets", "  a I : 0 0", "  a I : 0 -inf", 15, "not a finite number"),
    "not a number": ("nodes", "m1  6 4", "m1  6 four", 9, "'four' is not a number"),
    "not a number in scl": ("scl", "Height       : 2", "Height       : 2x", 6, "not a number"),
    "NetDegree not a count": ("nets", "NetDegree : 2 n1", "NetDegree : two n1", 5, "NetDegree"),
    "duplicate node": ("nodes", "c   3 2\n", "c   3 2\nb   1 2\n", 9, "duplicate node name 'b'"),
    "duplicate net": ("nets", "NetDegree : 2 n4", "NetDegree : 2 n1", 17, "duplicate net"),
    "duplicate in pl": ("pl", "m1 12  4 : N", "a 12  4 : N", 6, "placed twice"),
    "bad orientation": ("pl", "c  10  0 : FS", "c  10  0 : Q", 5, "orientation must be"),
    "bad fixed flag": ("pl", "p2 20  1 : N /FIXED", "p2 20  1 : N /STUCK", 8, "/FIXED"),
    "bad pin direction": ("nets", "  a O : 0.5 0.5", "  a X : 0.5 0.5", 6, "direction"),
    "bad node type": ("nodes", "p2  0 0 terminal", "p2  0 0 pad", 11, "terminal"),
    "zero-size movable": ("nodes", "c   3 2", "c   0 2", 8, "zero size"),
    "pin before any net": ("nets", "NumPins : 10\n", "NumPins : 10\n  a I\n", 4, "before"),
    "NumRows count": ("scl", "NumRows : 4", "NumRows : 3", 2, "NumRows says 3"),
    "vertical row": ("scl", "CoreRow Horizontal", "CoreRow Vertical", 4, "Horizontal"),
    "unknown row field": ("scl", "Sitesymmetry : Y", "Colour : Y", 10, "unknown row field"),
    "missing file": ("aux", "tiny.scl", "tiny_rows.scl", 1, "tiny_rows.scl"),
    "no nets file": ("aux", " tiny.nets", "", 1, "no .nets file"),
    # a .pl cut short must not leave a fixed terminal at (0, 0): the error is at its end
    "pl cut short": ("pl", "<cut 1>", "", None, "does not place 1 fixed node(s)"),
}


@pytest.mark.parametrize("case", sorted(BAD))
def test_malformed_input_names_file_and_line(tiny, case):
    suffix, old, new, line, words = BAD[case]
    target = tiny.with_suffix(f".{suffix}")
    _edit(target, old, new)
    with pytest.raises(DesignError) as info:
        read_aux(tiny)
    err = info.value
    expected_line = _line_count(target) if line is None else line
    assert err.file == str(target), str(err)
    assert err.line == expected_line, str(err)
    assert words in str(err)
    assert str(err).startswith(f"{target}:{expected_line}: ")
    assert "\n" not in str(err)


@pytest.mark.parametrize("payload, what", [(b"a 1 0 : N\n\x00\x01\x02 junk\n", "binary"),
                                           (b"a 1 0 : N\n\xff\xfe caf\xe9\n", "UTF-8")])
def test_binary_garbage_names_file_and_line(tiny, payload, what):
    target = tiny.with_suffix(".pl")
    target.write_bytes(b"UCLA pl 1.0\n" + payload)
    with pytest.raises(DesignError, match=what) as info:
        read_aux(tiny)
    assert info.value.file == str(target) and info.value.line == 3


def test_missing_aux_is_a_design_error(tmp_path):
    with pytest.raises(DesignError, match="not found"):
        read_aux(tmp_path / "none.aux")


def test_pins_without_offsets_and_unnamed_nets(tiny):
    _edit(tiny.with_suffix(".nets"), "NetDegree : 2 n1\n  a O : 0.5 0.5", "NetDegree : 2\n  a O")
    _edit(tiny.with_suffix(".wts"), "a 1\n", "")
    d = read_aux(tiny)
    assert d.net_names[0] == "net0" and d.net_names[1:] == ["n2", "n3", "n4"]
    assert d.pin_dx[0] == 0 and d.pin_dy[0] == 0


# ---------------------------------------------------------------------------------------------
# property: mutated valid files raise DesignError or read cleanly, nothing else

_ORIGINAL = {s: (DATA / f"tiny{s}").read_bytes() for s in SUFFIXES}


@st.composite
def _mutation(draw):
    suffix = draw(st.sampled_from(SUFFIXES))
    lines = _ORIGINAL[suffix].split(b"\n")
    op = draw(st.sampled_from(["delete", "duplicate", "truncate", "garble", "bytes", "swap"]))
    i = draw(st.integers(0, len(lines) - 1))
    if op == "delete":
        del lines[i]
    elif op == "duplicate":
        lines.insert(i, lines[i])
    elif op == "swap":
        j = draw(st.integers(0, len(lines) - 1))
        lines[i], lines[j] = lines[j], lines[i]
    elif op == "garble":
        toks = lines[i].split(b" ")
        k = draw(st.integers(0, len(toks) - 1))
        toks[k] = draw(st.sampled_from([b"", b":", b"-1", b"nan", b"1e999", b"x", b"0",
                                        b"terminal", b"NetDegree", b"/FIXED", b"FS", b"#",
                                        b"End", b"1.5.5", b"99999999999999999999"]))
        lines[i] = b" ".join(toks)
    data = b"\n".join(lines)
    if op == "truncate":
        data = data[: draw(st.integers(0, len(data)))]
    elif op == "bytes":
        pos = draw(st.integers(0, len(data)))
        data = data[:pos] + draw(st.binary(min_size=1, max_size=12)) + data[pos:]
    return suffix, data


@settings(max_examples=250, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(_mutation())
def test_mutated_files_raise_only_design_error(mutation):
    suffix, data = mutation
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        for s, content in _ORIGINAL.items():
            (tmp / f"tiny{s}").write_bytes(data if s == suffix else content)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                d = read_aux(tmp / "tiny.aux")
        except DesignError as e:
            assert "\n" not in str(e)
        else:
            assert d.num_blocks >= 1


# ---------------------------------------------------------------------------------------------
# the netlist against networkx, built from an independent line-by-line reading of the file


def _reference_nets(path: Path) -> list[list[str]]:
    nets: list[list[str]] = []
    for raw in path.read_text().splitlines():
        line = raw.split("#")[0].strip()
        if not line or line.startswith(("UCLA", "NumNets", "NumPins")):
            continue
        if line.startswith("NetDegree"):
            nets.append([])
        else:
            nets[-1].append(line.split()[0])
    return nets


def test_netlist_matches_networkx_graph(tmp_path):
    """Degree histograms and connected components of the bipartite block–net graph.

    Reference: networkx (Hagberg, Schult, Swart, SciPy 2008) on the file read line by line,
    against our CSR arrays through scipy.sparse.csgraph.
    """
    d0 = rent_design(3000, num_macros=4, seed=11)
    aux = write_aux(d0, None, tmp_path)
    # add a separate island (two new cells and their net) so there is more than one component
    nodes_file, nets_file = aux.with_suffix(".nodes"), aux.with_suffix(".nets")
    _edit(nodes_file, f"NumNodes : {d0.num_blocks}", f"NumNodes : {d0.num_blocks + 2}")
    nodes_file.write_text(nodes_file.read_text() + "iso0 1 2\niso1 1 2\n")
    _edit(nets_file, f"NumNets : {d0.num_nets}", f"NumNets : {d0.num_nets + 1}")
    _edit(nets_file, f"NumPins : {d0.num_pins}", f"NumPins : {d0.num_pins + 2}")
    nets_file.write_text(nets_file.read_text() + "NetDegree : 2 island\n  iso0 B\n  iso1 B\n")
    d = read_aux(aux)
    n_nets = d.num_nets

    G = nx.Graph()
    G.add_nodes_from(("b", nm) for nm in d.names)
    for j, pins in enumerate(_reference_nets(nets_file)):
        G.add_node(("n", j))
        G.add_edges_from((("n", j), ("b", p)) for p in pins)
    assert G.number_of_nodes() == d.num_blocks + n_nets

    # block degrees = number of distinct nets per block; net degrees = distinct blocks per net
    inc = sp.csr_matrix((np.ones(d.num_pins), (d.pin_net, d.pin_block)),
                        shape=(d.num_nets, d.num_blocks))
    inc.sum_duplicates()
    inc.data[:] = 1
    ours_net = Counter(np.diff(inc.indptr).tolist())
    ours_block = Counter(np.asarray(inc.sum(axis=0)).ravel().astype(int).tolist())
    ref_net = Counter(G.degree(v) for v in G if v[0] == "n")
    ref_block = Counter(G.degree(v) for v in G if v[0] == "b")
    assert ours_net == ref_net
    assert ours_block == ref_block
    bip = sp.bmat([[None, inc], [inc.T, None]]).tocsr()
    ncomp, _ = connected_components(bip, directed=False)
    assert ncomp == nx.number_connected_components(G)


def test_read_pl_keeps_unlisted_blocks_and_fixes_flagged_ones(tiny, tmp_path):
    d = read_aux(tiny)
    pl = tmp_path / "part.pl"
    pl.write_text("UCLA pl 1.0\nb 3.5 4 : FN /FIXED\n")
    fp = read_pl(d, pl)
    assert fp.position("b") == (3.5, 4.0) and fp.orientation("b") == "FN"
    assert fp.status_of("b") == "fixed"
    assert fp.position("a") == d.initial.position("a")
    assert fp.status_of("p1") == "fixed" and fp.status_of("a") == "movable"
    pl.write_text("UCLA pl 1.0\nb 3.5 4 : FN\nzz 1 1 : N\n")
    with pytest.raises(DesignError) as info:
        read_pl(d, pl)
    assert info.value.line == 3 and "zz" in str(info.value)


# ---------------------------------------------------------------------------------------------
# hardening: valid input that was refused, invalid input that was accepted


@pytest.mark.filterwarnings("ignore:.*weight line")
def test_unnamed_net_never_takes_a_given_name(tiny):
    # the second net is unnamed (numbered net1), the third is named net1 in the file
    nets = tiny.with_suffix(".nets")
    _edit(nets, "NetDegree : 3 n2", "NetDegree : 3")
    _edit(nets, "NetDegree : 3 n3", "NetDegree : 3 net1")
    d = read_aux(tiny)
    assert len(set(d.net_names)) == d.num_nets == 4
    assert d.net_names[2] == "net1" and d.net_names[1] != "net1"


def test_byte_order_mark_is_accepted(tiny):
    for s in (".nodes", ".pl"):
        p = tiny.with_suffix(s)
        p.write_bytes(b"\xef\xbb\xbf" + p.read_bytes())
    assert read_aux(tiny).initial.identical(read_aux(DATA / "tiny.aux").initial)


def test_weights_naming_nothing_are_skipped_with_a_warning(tiny):
    _edit(tiny.with_suffix(".wts"), "n3 2", "n3 2\nn9 5")
    with pytest.warns(fw.formats.bookshelf.BookshelfWarning, match=r"tiny\.wts:\d+: .*'n9'"):
        d = read_aux(tiny)
    assert d.net_weight.tolist() == [1, 1, 2, 1]


def test_pl_keeps_terminal_and_terminal_ni_apart(tmp_path):
    # Bookshelf: terminal = fixed, may not be overlapped; terminal_NI = may be overlapped
    d = read_aux(DATA / "tiny.aux")
    write_pl(d, d.initial, tmp_path / "o.pl")
    lines = {ln.split()[0]: ln for ln in (tmp_path / "o.pl").read_text().splitlines()
             if ln and ln[0] in "abcmp"}
    assert lines["p2"].endswith("/FIXED") and lines["p1"].endswith("/FIXED_NI")
    write_aux(d, d.initial, tmp_path / "set.aux")
    nodes = (tmp_path / "set.nodes").read_text()
    assert "p2 0.0 0.0 terminal\n" in nodes and "p1 0.0 0.0 terminal_NI\n" in nodes
    back = read_aux(tmp_path / "set.aux")
    assert back.terminal_ni.tolist() == d.terminal_ni.tolist()


def test_compressed_set_reads_like_the_plain_one(tiny):
    import bz2
    import gzip

    for s, opener in ((".nodes", gzip.open), (".nets", bz2.open)):
        p = tiny.with_suffix(s)
        with opener(str(p) + (".gz" if opener is gzip.open else ".bz2"), "wb") as f:
            f.write(p.read_bytes())
        p.unlink()
    aux = tiny.read_text().replace("tiny.nodes", "tiny.nodes.gz").replace("tiny.nets",
                                                                          "tiny.nets.bz2")
    tiny.write_text(aux)
    with gzip.open(str(tiny) + ".gz", "wt") as f:
        f.write(aux)
    ref = read_aux(DATA / "tiny.aux")
    for path in (tiny, str(tiny) + ".gz"):
        d = fw.load(path)
        assert d.names == ref.names and d.net_start.tolist() == ref.net_start.tolist()
        assert d.initial.identical(ref.initial)


def test_failed_set_write_leaves_the_old_set(tmp_path, monkeypatch):
    d = read_aux(DATA / "tiny.aux")
    write_aux(d, d.initial, tmp_path / "s.aux")
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir()}
    moved = d.initial.copy()
    moved.x[:] += 1.0
    import floorwidget.formats._io as io_mod
    real, calls = io_mod.os.fsync, []

    def fail_on_fourth(fd):  # "disk full" part-way through the set
        calls.append(fd)
        if len(calls) == 4:
            raise OSError(28, "No space left on device")
        return real(fd)

    monkeypatch.setattr(io_mod.os, "fsync", fail_on_fourth)
    with pytest.raises(DesignError, match=r"s\.\w+: cannot write: No space left"):
        write_aux(d, moved, tmp_path / "s.aux")
    monkeypatch.undo()
    assert {p.name: p.read_bytes() for p in tmp_path.iterdir()} == before  # no temporaries
    assert read_aux(tmp_path / "s.aux").initial.identical(d.initial)


def test_unwritable_folder_is_named_as_the_output(tmp_path):
    d = read_aux(DATA / "tiny.aux")
    with pytest.raises(DesignError, match=r"nowhere/s\.aux: cannot write: folder"):
        write_aux(d, d.initial, tmp_path / "nowhere" / "s.aux")
