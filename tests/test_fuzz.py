"""Fuzzing every reader: mutated inputs give a DesignError naming the file and a line (or the
object at fault), or a valid design -- never another exception, never a hang.  The hand-drawn
constraints (cell regions, partial blockages, halos) get seeds and mutations of their own,
aimed at their sections, and a few of the accepted ones are placed.

Each format starts from a small valid seed (the hand-made test data, or a file written by
floorwidget itself) and hypothesis applies one to three mutations: byte flips, truncation, line
deletion and duplication, token swaps, and numbers replaced by huge, tiny, negative, non-finite
or overlong ones.  An accepted input must pass :meth:`Design.problems` and
:func:`floorwidget.evaluate` (or, for a session, give its report).

Profiles: the default runs a few hundred mutants per format (seconds); ``FW_FUZZ=long`` runs
thousands (minutes; see DEVELOPERS.md).  The counts per format and outcome are written to
``tests/artifacts/fuzz-counts.json`` and printed (``pytest -s``) at the end of the module.
"""

from __future__ import annotations

import contextlib
import copy
import gzip
import json
import os
import random
import re
import signal
import tempfile
import warnings
from collections import Counter
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from session_script_check import script_is_data_only

import floorwidget as fw
from floorwidget.design import FENCE, MOVABLE, Design, DesignError
from floorwidget.formats._io import read_text
from floorwidget.formats.bookshelf import read_aux
from floorwidget.session import ACTIONS, Session

DATA = Path(__file__).parent / "data"
LONG = os.environ.get("FW_FUZZ", "").lower() == "long"
EXAMPLES = {"json": 300, "bookshelf": 400, "lef": 300, "def": 400, "session": 300, "gz": 100,
            "gsrc": 300, "session_edits": 150, "session_log": 200, "constraints-json": 300,
            "constraints-def": 300, "constraints-place": 60, "verilog": 300}
if LONG:
    EXAMPLES = {k: 20 * v for k, v in EXAMPLES.items()}
TIME_LIMIT = 10.0  # seconds per mutant; the seeds load in milliseconds

COUNTS: Counter = Counter()


@pytest.fixture(scope="module", autouse=True)
def _report_counts(artifacts):
    yield
    table = {}
    for (fmt, outcome), k in sorted(COUNTS.items()):
        table.setdefault(fmt, {})[outcome] = k
    profile = "long" if LONG else "fast"
    (artifacts / "fuzz-counts.json").write_text(json.dumps({"profile": profile,
                                                            "counts": table}, indent=1))
    print(f"\nfuzz mutants ({profile} profile):",
          ", ".join(f"{f} {v.get('mutants', 0)} ({v.get('accepted', 0)} accepted)"
                    for f, v in table.items()))


# ---------------------------------------------------------------------------------------------
# mutations

NASTY = [b"1e308", b"-1e308", b"1e400", b"nan", b"NaN", b"inf", b"-inf", b"Infinity", b"0",
         b"-0", b"-1", b"1e-320", b"9223372036854775808", b"18446744073709551616",
         b"4294967296", b"1.5", b"9" * 400, b"1" + b"0" * 5000, b"0x10", b"1_000", b""]
_NUMBER = re.compile(rb"-?\d+(?:\.\d+)?(?:[eE][-+]?\d+)?")
_TOKEN = re.compile(rb"[^\s]+")

OPS = st.lists(st.tuples(st.sampled_from(["flip", "truncate", "delete_line", "dup_line",
                                          "swap_tokens", "number", "number", "insert_line"]),
                         st.integers(0, 2**31), st.integers(0, 2**31)),
               min_size=1, max_size=3)


def mutate(data: bytes, ops) -> bytes:
    """Apply ``ops`` (kind, a, b) to ``data``; positions are taken modulo what is there."""
    for kind, a, b in ops:
        if not data:
            break
        if kind == "flip":
            i = a % len(data)
            data = data[:i] + bytes([b % 256]) + data[i + 1:]
        elif kind == "truncate":
            data = data[:a % len(data)]
        elif kind in ("delete_line", "dup_line", "insert_line"):
            lines = data.split(b"\n")
            i = a % len(lines)
            if kind == "delete_line":
                del lines[i]
            elif kind == "dup_line":
                lines.insert(i, lines[i])
            else:
                lines.insert(i, lines[b % len(lines)][::-1])
            data = b"\n".join(lines)
        elif kind == "swap_tokens":
            toks = list(_TOKEN.finditer(data))
            if len(toks) > 1:
                m1, m2 = toks[a % len(toks)], toks[b % len(toks)]
                if m1.start() > m2.start():
                    m1, m2 = m2, m1
                if m1.end() <= m2.start():
                    data = (data[:m1.start()] + m2.group() + data[m1.end():m2.start()]
                            + m1.group() + data[m2.end():])
        elif kind == "number":
            nums = list(_NUMBER.finditer(data))
            if nums:
                m = nums[a % len(nums)]
                data = data[:m.start()] + NASTY[b % len(NASTY)] + data[m.end():]
    return data


JSON_NASTY = [10**30, 2**63, -2**63 - 1, -1, 0, 1, 0.5, 1e308, -1e308, float("nan"),
              float("inf"), "x", "", None, True, [], {}, [0, 0, 0], "__BIG__", "__DEEP__",
              "__NEG_BIG__"]
_RAW = {'"__BIG__"': "1" + "0" * 5000, '"__NEG_BIG__"': "-1e400",
        '"__DEEP__"': "[" * 1000 + "]" * 1000}


def _dump(doc) -> bytes:
    """``doc`` as JSON text, the placeholders of :data:`_RAW` written out raw."""
    text = json.dumps(doc)
    for k, v in _RAW.items():
        text = text.replace(k, v)
    return text.encode()


def _slots(node, out):
    """Every (container, key) of a decoded JSON document, depth first."""
    items = node.items() if isinstance(node, dict) else enumerate(node)
    for k, v in items:
        out.append((node, k))
        if isinstance(v, (dict, list)):
            _slots(v, out)
    return out


def mutate_json(data: bytes, ops) -> bytes:
    """Structural mutations of a JSON document: values replaced by wrong types, huge, negative,
    non-finite or overlong numbers and deep nesting; keys deleted."""
    doc = json.loads(data)
    for kind, a, b in ops:
        slots = _slots(doc, [])
        if not slots:
            break
        node, key = slots[a % len(slots)]
        if kind == "delete_line" and isinstance(node, dict):
            del node[key]
        else:
            node[key] = copy.deepcopy(JSON_NASTY[b % len(JSON_NASTY)])
    return _dump(doc)


class _Hang(Exception):
    pass


@contextlib.contextmanager
def _time_limit(seconds: float):
    def alarm(signum, frame):
        raise _Hang(f"no answer within {seconds} s")

    old = signal.signal(signal.SIGALRM, alarm)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)


def check(fmt: str, load) -> None:
    """Run ``load()``; pass on a well-formed DesignError or a valid result, fail otherwise."""
    COUNTS[fmt, "mutants"] += 1
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            with _time_limit(TIME_LIMIT):
                result = load()
                design = result.design if isinstance(result, Session) else result
                assert isinstance(design, Design)
                assert design.problems() == []
                rep = result.report if isinstance(result, Session) else fw.evaluate(design)
                assert rep["num_blocks"] == design.num_blocks
        except DesignError as e:
            COUNTS[fmt, "rejected"] += 1
            assert e.file, f"no file in: {e}"
            assert e.line is not None or e.where, f"neither a line nor an object in: {e}"
            assert "\n" not in str(e), f"more than one line: {e!r}"
            return
        except _Hang as e:
            COUNTS[fmt, "hang"] += 1
            raise AssertionError(f"{fmt}: {e}") from None
        except Exception as e:
            COUNTS[fmt, "crash"] += 1
            raise AssertionError(f"{fmt}: {type(e).__name__}: {e}") from e
    COUNTS[fmt, "accepted"] += 1


def fuzz(fmt: str) -> settings:
    """Hypothesis settings of one format's test: its number of mutants, no deadline, the same
    mutants on every run of the default profile (random ones in the long profile)."""
    return settings(max_examples=EXAMPLES[fmt], deadline=None, derandomize=not LONG,
                    database=None, print_blob=True,
                    suppress_health_check=[HealthCheck.too_slow, HealthCheck.filter_too_much,
                                           HealthCheck.function_scoped_fixture])


def _run_in(files: dict[str, bytes], main: str, load):
    """Write ``files`` into a fresh folder and ``check`` loading ``main`` from it."""
    with tempfile.TemporaryDirectory(prefix="fwfuzz") as d:
        d = Path(d)
        for name, data in files.items():
            (d / name).write_bytes(data)
        load(d / main)


def _load_def(fmt: str, files: dict[str, bytes], main: str = "k.def") -> None:
    """``check`` loading the DEF ``main`` of ``files`` with the LEFs ``t.lef`` and ``c.lef``."""
    _run_in(files, main, lambda p: check(
        fmt, lambda: fw.load(p, lef=[p.parent / "t.lef", p.parent / "c.lef"])))


# ---------------------------------------------------------------------------------------------
# seeds

BOOKSHELF = {f"tiny{s}": (DATA / "bookshelf" / f"tiny{s}").read_bytes()
             for s in (".aux", ".nodes", ".nets", ".wts", ".pl", ".scl")}
LEFDEF = DATA / "lefdef"
# the invented block, with a partial blockage, a fence and a group added for the new readers
DEF_SEED = (LEFDEF / "kestrel.def").read_bytes().replace(
    b"END BLOCKAGES",
    b"- PLACEMENT + PARTIAL 40 RECT ( 20000 30000 ) ( 50000 50000 ) ;\nEND BLOCKAGES"
).replace(b"BLOCKAGES 2 ;", b"BLOCKAGES 3 ;").replace(
    b"COMPONENTS 12 ;", b"REGIONS 1 ;\n- r_inv ( 20000 30000 ) ( 100000 100000 ) + TYPE FENCE ;\n"
    b"END REGIONS\n\nCOMPONENTS 12 ;").replace(
    b"END DESIGN", b"GROUPS 1 ;\n- g_inv u_inv* + REGION r_inv ;\nEND GROUPS\n\nEND DESIGN")
TECH_LEF = (LEFDEF / "kestrel_tech.lef").read_bytes()
CELL_LEF = (LEFDEF / "kestrel_cells.lef").read_bytes()


@pytest.fixture(scope="module")
def tiny_design():
    return read_aux(DATA / "bookshelf" / "tiny.aux")


@pytest.fixture(scope="module")
def json_seed(tiny_design, tmp_path_factory) -> bytes:
    p = tmp_path_factory.mktemp("seed") / "tiny.json"
    fw.save(tiny_design, tiny_design.initial, p)
    return p.read_bytes()


@pytest.fixture(scope="module")
def session_seed(tiny_design, tmp_path_factory) -> bytes:
    s = Session(tiny_design)
    s.move("m1", 3.0, 2.0)
    s.pin("m1")
    s.snapshot("first")
    s.rotate("m1")
    s.undo()
    s.add_blockage([1.0, 1.0, 4.0, 3.0], max_density=0.5)
    s.set_halo("m1", [0.5, 0.0, 0.5, 0.0])
    s.add_region("left", [0.0, 0.0, 10.0, 8.0])
    s.assign_group("left", ["a", "b"])
    s.undo()
    p = tmp_path_factory.mktemp("seed") / "tiny.session.json"
    s.save(p)
    return p.read_bytes()


# ---------------------------------------------------------------------------------------------
# one test per format


@fuzz("json")
@given(structural=st.booleans(), ops=OPS)
def test_native_json(json_seed, structural, ops):
    data = mutate_json(json_seed, ops) if structural else mutate(json_seed, ops)
    _run_in({"d.json": data}, "d.json", lambda p: check("json", lambda: fw.load(p)))


@fuzz("bookshelf")
@given(which=st.sampled_from(sorted(BOOKSHELF)), ops=OPS)
def test_bookshelf_set(which, ops):
    files = dict(BOOKSHELF)
    files[which] = mutate(files[which], ops)
    _run_in(files, "tiny.aux", lambda p: check("bookshelf", lambda: fw.load(p)))


@fuzz("lef")
@given(ops=OPS)
def test_lef(ops):
    _load_def("lef", {"k.def": DEF_SEED, "t.lef": TECH_LEF, "c.lef": mutate(CELL_LEF, ops)})


VERILOG_SEED = (DATA / "verilog" / "wren_top.v").read_bytes()
WREN_LEF = (DATA / "verilog" / "wren.lef").read_bytes()


@fuzz("verilog")
@given(ops=OPS)
def test_verilog(ops):
    _run_in({"w.v": mutate(VERILOG_SEED, ops), "w.lef": WREN_LEF}, "w.v", lambda p: check(
        "verilog", lambda: fw.load(p, lef=[p.parent / "w.lef"], utilization=0.5, margin=2)))


def _load_and_write_back(p: Path):
    """Load a DEF; when it is accepted, write it back unedited (it must come back verbatim) and
    with every movable block moved by one database unit (it must read back so)."""
    lefs = [p.parent / "t.lef", p.parent / "c.lef"]
    d = fw.load(p, lef=lefs)
    out = p.parent / "back.def"
    try:
        fw.save(d, d.initial, out)
        assert read_text(out) == read_text(p), "an unedited write-back is not verbatim"
        fp = d.initial.copy()
        fp.x[fp.status == MOVABLE] += 1 / d.dbu
        fw.save(d, fp, out)
        back = fw.load(out, lef=lefs)
    except DesignError as e:
        raise AssertionError(f"write-back of an accepted DEF failed: {e}") from None
    assert np.allclose(back.initial.x, fp.x, rtol=0, atol=0.51 / d.dbu)
    assert np.allclose(back.initial.y, fp.y, rtol=0, atol=0.51 / d.dbu)
    return d


@fuzz("def")
@given(ops=OPS)
def test_def(ops):
    files = {"k.def": mutate(DEF_SEED, ops), "t.lef": TECH_LEF, "c.lef": CELL_LEF}
    _run_in(files, "k.def", lambda p: check("def", lambda: _load_and_write_back(p)))


@fuzz("gz")
@given(ops=OPS)
def test_compressed_def(ops):
    # the compressed bytes themselves are mutated: damaged streams must name the file
    _load_def("gz", {"k.def.gz": mutate(gzip.compress(DEF_SEED, mtime=0), ops),
                     "t.lef": TECH_LEF, "c.lef": CELL_LEF}, "k.def.gz")


@fuzz("session")
@given(structural=st.booleans(), ops=OPS)
def test_session_file(tiny_design, session_seed, structural, ops):
    data = mutate_json(session_seed, ops) if structural else mutate(session_seed, ops)
    _run_in({"s.json": data}, "s.json",
            lambda p: check("session", lambda: Session.load(p, design=tiny_design)))


# --- session constraint edits and crafted session logs ------------------------------------------

HOSTILE = ["seed=0); __import__('os').system('touch PWNED'); (", "m1', 1, 1); import os; ('",
           "__import__", "m1\n", "", "0.5", "nan", "a" * 300, "move", "batch"]
BAD_VALUES = JSON_NASTY[:-3] + HOSTILE + [-5.0, 1e9, [1.0, 2.0], [0.0, 0.0, 0.0, 0.0],
                                           [30.0, 30.0, 40.0, 40.0], ("m1",), {"m1": 1}]
EDITS = st.lists(st.tuples(st.sampled_from(
    ["add_blockage", "add_blockage", "move_blockage", "set_blockage_density", "remove_blockage",
     "set_halo", "add_region", "add_region", "remove_region", "assign_group", "assign_group",
     "move", "pin", "undo", "redo"]), st.integers(0, 2), st.integers(0, 2**32 - 1)),
    min_size=1, max_size=10)


def _edit_args(op: str, rnd, n_blockages: int) -> list:
    """Good arguments of ``op`` on the tiny design (die and core 20 x 8 µm)."""
    def rect():
        x, y = rnd.uniform(0, 16), rnd.uniform(0, 6)
        return [x, y, x + rnd.uniform(0.5, 4), y + rnd.uniform(0.5, 2)]

    k = rnd.randrange(max(n_blockages, 1))
    region = rnd.choice(["r1", "r2"])
    return {"add_blockage": lambda: [rect(), rnd.choice([0.0, rnd.random()])],
            "move_blockage": lambda: [k, rnd.uniform(0, 15), rnd.uniform(0, 5)],
            "set_blockage_density": lambda: [k, rnd.random()],
            "remove_blockage": lambda: [k],
            "set_halo": lambda: ["m1", rnd.choice([rnd.uniform(0, 2),
                                                   [rnd.uniform(0, 2) for _ in range(4)]])],
            "add_region": lambda: [region, rect(), rnd.choice(["fence", "guide"])],
            "remove_region": lambda: [region],
            "assign_group": lambda: [rnd.choice([region, None]),
                                     rnd.sample(["a", "b", "c"], rnd.randint(1, 3))],
            "move": lambda: [rnd.choice(["a", "m1", "p1"]), rnd.uniform(-2, 22),
                             rnd.uniform(-2, 10)],
            "pin": lambda: [rnd.choice(["a", "m1", ["b", "c"]])],
            "undo": lambda: [], "redo": lambda: []}[op]()


@fuzz("session_edits")
@given(edits=EDITS, flow=st.sampled_from([None, None, None, "off", "on"]))
def test_session_constraint_edits(tiny_design, tmp_path_factory, edits, flow):
    """Random constraint edits, two in three with good arguments, the others with one argument
    replaced by a wrong type, a hostile string or an out-of-range value: each is taken or
    refused with a DesignError or TypeError leaving the session as it was; what is taken keeps
    the design valid, saves, loads back equal and replays as a script of literal calls only.
    Two in five edited sessions are then placed (flat or multilevel flow): a floorplan whose
    fence members lie in their fence and whose partial blockages hold their caps when the
    cells are legal, or a one-line refusal that leaves the session as it was."""
    s = Session(tiny_design)
    COUNTS["session_edits", "mutants"] += 1
    for op, bad, seed in edits:
        rnd = random.Random(seed)
        args = _edit_args(op, rnd, len(s.design.blockages))
        if bad == 0 and args:
            args[rnd.randrange(len(args))] = copy.deepcopy(rnd.choice(BAD_VALUES))
        fp, log = s.floorplan, s.log
        try:
            with _time_limit(TIME_LIMIT):
                getattr(s, op)(*args)
        except (DesignError, TypeError) as e:
            assert "\n" not in str(e), f"more than one line: {e!r}"
            assert s.floorplan is fp and s.log == log, f"{op} changed the session and failed"
            COUNTS["session_edits", "edits refused"] += 1
            COUNTS["session_edits", f"{op} refused"] += 1
            continue
        COUNTS["session_edits", "edits taken"] += 1
        COUNTS["session_edits", f"{op} taken"] += 1
        assert s.design.problems() == [], (op, args)
    if flow is not None:
        _place_edited(s, flow)
    p = tmp_path_factory.mktemp("edits") / "s.json"
    s.save(p)
    t = Session.load(p, design=tiny_design)
    assert t.floorplan.identical(s.floorplan) and t.log == s.log and t.history == s.history
    assert np.array_equal(t.design.blockages, s.design.blockages)
    assert np.array_equal(t.design.halo, s.design.halo)
    assert t.design.regions.to_list() == s.design.regions.to_list()
    assert script_is_data_only(s.script())
    COUNTS["session_edits", "accepted"] += 1


def _place_edited(s: Session, flow: str) -> None:
    """Place an edited session (see :func:`test_session_constraint_edits`)."""
    from floorwidget.design import CELL
    from floorwidget.kernels.fill import covered_share

    fp, log = s.floorplan, s.log
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            with _time_limit(TIME_LIMIT):
                s.place(multilevel=flow)
        except DesignError as e:
            assert "\n" not in str(e), f"more than one line: {e!r}"
            assert s.floorplan is fp and s.log == log, "a refused place changed the session"
            COUNTS["session_edits", "place refused"] += 1
            return
        except _Hang as e:
            raise AssertionError(f"session_edits place: {e}") from None
    COUNTS["session_edits", "placed"] += 1
    d, rep, r = s.design, s.report, s.floorplan.rects()
    if not rep.get("cells_legal", rep["legal"]):
        return
    part = d.blockage_max_density > 0
    if part.any():
        fill = covered_share(d.blockages[part], r[d.kind == CELL])
        assert (fill <= d.blockage_max_density[part] + 1e-9).all(), fill
    reg = d.regions
    for k in np.flatnonzero(reg.kind == FENCE):  # members inside the fence's rectangles
        fence = reg.rects_of(k)  # (which do not overlap: the areas inside them add up)
        for m in reg.members(k):
            lo, hi = np.maximum(r[m, :2], fence[:, :2]), np.minimum(r[m, 2:], fence[:, 2:])
            inside = np.prod(np.clip(hi - lo, 0, None), axis=1).sum()
            area = (r[m, 2] - r[m, 0]) * (r[m, 3] - r[m, 1])
            assert inside >= area * (1 - 1e-9) - 1e-9, f"member {d.names[m]} outside its fence"


def _graft(doc: dict, ops) -> None:
    """Put hostile text or values where a session log holds an action name, a keyword, an
    argument or a batch label."""
    log = doc["log"]
    for kind, a, b in ops:
        e = log[a % len(log)]
        bad = HOSTILE[b % len(HOSTILE)] if b % 3 else JSON_NASTY[b % len(JSON_NASTY[:-3])]
        if kind in ("flip", "truncate"):
            e["op"] = bad
        elif kind in ("delete_line", "dup_line"):
            e.setdefault("kwargs", {})[str(bad)] = 1
        elif kind == "insert_line":
            log.append({"op": "batch", "label": bad, "actions": [copy.deepcopy(e)]})
        elif e.get("args"):
            e["args"][b % len(e["args"])] = bad
        else:
            e["args"] = [bad]


@fuzz("session_log")
@given(ops=OPS)
def test_crafted_session_logs(tiny_design, session_seed, ops):
    """Session files whose log carries hostile names, keywords and values: refused with a
    one-line DesignError naming the file and the entry, or loaded with a script of literal
    calls of the action table only."""
    doc = json.loads(session_seed)
    _graft(doc, ops)

    def load(p):
        s = Session.load(p, design=tiny_design)
        assert script_is_data_only(s.script())
        return s

    _run_in({"s.json": json.dumps(doc).encode()}, "s.json",
            lambda p: check("session_log", lambda: load(p)))


def test_session_seed_log_covers_the_table(session_seed):
    """The crafted-log fuzz starts from a log that uses several kinds of action."""
    ops = {e["op"] for e in json.loads(session_seed)["log"]}
    assert len(ops) >= 8 and ops <= set(ACTIONS)


# --- GSRC sets (floorwidget.formats.gsrc) -----------------------------------------------------

GSRC = {
    "g.blocks": b"UCLA blocks 1.0\nNumSoftRectangularBlocks : 1\nNumHardRectilinearBlocks : 2\n"
                b"NumTerminals : 2\n\na hardrectilinear 4 (0, 0) (0, 20) (10, 20) (10, 0)\n"
                b"b hardrectilinear 6 (0, 0) (0, 30) (10, 30) (10, 10) (30, 10) (30, 0)\n"
                b"s softrectangular 400 0.25 4.0\np1 terminal\np2 terminal\n",
    "g.nets": b"UCLA nets 1.0\nNumNets : 2\nNumPins : 5\nNetDegree : 3 clk\na B : %50 %-100\n"
              b"s B\np1 B\nNetDegree : 2\nb\np2 B : 1.5 -2\n",
    "g.pl": b"UCLA pl 1.0\np1 0 0\np2 120 60\n",
}


def _has_gsrc() -> bool:
    try:
        from floorwidget.formats import gsrc  # noqa: F401
    except ImportError:
        return False
    return True


@pytest.mark.skipif(not _has_gsrc(), reason="no GSRC reader in this build")
@fuzz("gsrc")
@given(which=st.sampled_from(sorted(GSRC)), ops=OPS)
def test_gsrc_set(which, ops):
    files = dict(GSRC)
    files[which] = mutate(files[which], ops)
    _run_in(files, "g.blocks", lambda p: check("gsrc", lambda: fw.load(p)))


def test_mutations_change_the_input():
    # the harness itself: every mutation kind does something on the seed
    for kind in ("flip", "truncate", "delete_line", "dup_line", "swap_tokens", "number",
                 "insert_line"):
        assert mutate(DEF_SEED, [(kind, 1234, 7)]) != DEF_SEED, kind


# ---------------------------------------------------------------------------------------------
# the constraints: cell regions, partial blockages, halos

# a DEF with more of them: a guide of two rectangles, a polygon and two partial blockages
CONSTRAINT_DEF = DEF_SEED.replace(
    b"END BLOCKAGES", b"- PLACEMENT + PARTIAL 10 RECT ( 200000 200000 ) ( 260000 240000 ) ;\n"
    b"- PLACEMENT POLYGON ( 300000 300000 ) ( 340000 300000 ) ( 340000 320000 ) "
    b"( 320000 320000 ) ( 320000 340000 ) ( 300000 340000 ) ;\nEND BLOCKAGES"
).replace(b"BLOCKAGES 3 ;", b"BLOCKAGES 5 ;").replace(
    b"REGIONS 1 ;", b"REGIONS 2 ;\n- r_pull ( 150000 150000 ) ( 200000 180000 ) "
    b"( 200000 150000 ) ( 230000 170000 ) + TYPE GUIDE ;").replace(
    b"GROUPS 1 ;", b"GROUPS 2 ;\n- g_pll u_pll + REGION r_pull ;")
_SECTIONS = (b"BLOCKAGES", b"REGIONS", b"GROUPS", b"COMPONENTS")


def mutate_sections(data: bytes, ops) -> bytes:
    """``mutate`` applied inside one constraint section of a DEF (the first element of each
    op picks the section: blockages, regions, groups, or the components with their halos)."""
    for op in ops:
        name = _SECTIONS[op[1] % len(_SECTIONS)]
        i = data.find(b"\n" + name + b" ")
        j = data.find(b"END " + name, i)
        if i < 0 or j < 0:
            continue
        data = data[:i + 1] + mutate(data[i + 1:j], [op]) + data[j:]
    return data


# plausible replacements by the type of what they replace: numbers (coordinates, densities,
# halo sides), rectangles and halos (four numbers), names and member lists
CONSTRAINT_NASTY = {
    "number": [0, 1, 2, 3, 8, 20, 30, -1, 0.5, 1e-300, 0.999, 1.0],
    "four": [[0, 0, 20, 8], [-1, 0, 5, 5], [0, 0, 30, 2], [2, 0, 4, 8], [3, 3, 3, 5],
             [1, 1, 1, 1], [0, 0, 0, 0], [0, 0, 3, 8], [6, 0, 9, 4]],
    "text": ["fence", "guide", "left", "pull", "a", "m1", ""],
    "list": [["a", "a"], ["m1"], ["p1"], ["a", "b", "c"], [], [[0, 0, 3, 8]],
             [[0, 0, 3, 8], [6, 0, 9, 4]]],
}


def _plausible(value, b: int):
    """A replacement for ``value`` of the same kind (see :data:`CONSTRAINT_NASTY`)."""
    if value is None:  # a block without a halo: give it one
        pool = CONSTRAINT_NASTY["four"]
    elif isinstance(value, bool) or not isinstance(value, (int, float, str, list)):
        pool = JSON_NASTY
    elif isinstance(value, (int, float)):
        pool = CONSTRAINT_NASTY["number"]
    elif isinstance(value, str):
        pool = CONSTRAINT_NASTY["text"]
    elif len(value) == 4 and all(isinstance(v, (int, float)) for v in value):
        pool = CONSTRAINT_NASTY["four"]
    else:
        pool = CONSTRAINT_NASTY["list"]
    return copy.deepcopy(pool[b % len(pool)])


def _constraint_slots(doc) -> list:
    """The (container, key) slots under ``regions``, ``blockages`` and every block's halo."""
    out = []
    for key in ("regions", "blockages"):
        if isinstance(doc.get(key), list):
            out.append((doc, key))
            _slots(doc[key], out)
    for b in doc.get("blocks", []) if isinstance(doc.get("blocks"), list) else []:
        if isinstance(b, dict):
            out.append((b, "halo"))
            if isinstance(b.get("halo"), list):
                _slots(b["halo"], out)
    return out


def mutate_constraints(data: bytes, ops) -> bytes:
    """Structural mutations of the constraints of a JSON design: values replaced (wrong
    types, other rectangles, densities, member lists), keys deleted, list items duplicated (a
    region twice under another name: overlapping fences; a rectangle twice)."""
    doc = json.loads(data)
    for kind, a, b in ops:
        slots = _constraint_slots(doc)
        if not slots:
            break
        node, key = slots[a % len(slots)]
        if kind == "delete_line" and isinstance(node, dict):
            node.pop(key, None)
        elif kind == "dup_line" and isinstance(node, list):
            item = copy.deepcopy(node[key])
            if isinstance(item, dict) and "name" in item:
                item["name"] = f"{item['name']}_{b % 7}"
            node.append(item)
        elif kind in ("number", "swap_tokens"):
            node[key] = _plausible(node.get(key) if isinstance(node, dict) else node[key], b)
        else:
            node[key] = copy.deepcopy(JSON_NASTY[b % len(JSON_NASTY)])
    return _dump(doc)


@pytest.fixture(scope="module")
def constraints_seed(tiny_design, tmp_path_factory) -> bytes:
    s = Session(tiny_design)
    s.add_blockage([1.0, 1.0, 4.0, 3.0], max_density=0.5)
    s.add_blockage([5.0, 5.0, 8.0, 6.0], max_density=0.2)
    s.set_halo("m1", [0.5, 0.0, 0.5, 0.0])
    s.add_region("left", [[0.0, 0.0, 3.0, 8.0], [3.0, 0.0, 5.0, 2.0]])
    s.add_region("pull", [6.0, 0.0, 9.0, 4.0], kind="guide")
    s.assign_group("left", ["a"])
    s.assign_group("pull", ["b"])
    p = tmp_path_factory.mktemp("seed") / "constraints.json"
    fw.save(s.design, s.floorplan, p)
    return p.read_bytes()


def test_constraint_seeds_are_valid_and_mutations_reach_them(constraints_seed):
    with tempfile.TemporaryDirectory() as t:
        (Path(t) / "k.def").write_bytes(CONSTRAINT_DEF)
        (Path(t) / "c.json").write_bytes(constraints_seed)
        d = fw.load(Path(t) / "k.def", lef=[LEFDEF / "kestrel_tech.lef",
                                            LEFDEF / "kestrel_cells.lef"])
        assert len(d.regions) == 2 and (d.blockage_max_density > 0).sum() == 2
        j = fw.load(Path(t) / "c.json")
        assert len(j.regions) == 2 and (j.halo > 0).any()
    for op in [("dup_line", 1, 3), ("number", 5, 2), ("delete_line", 4, 0)]:
        assert mutate_constraints(constraints_seed, [op]) != constraints_seed
    for k in range(len(_SECTIONS)):
        assert mutate_sections(CONSTRAINT_DEF, [("delete_line", k, 2)]) != CONSTRAINT_DEF


@fuzz("constraints-json")
@given(ops=OPS)
def test_constraints_json(constraints_seed, ops):
    data = mutate_constraints(constraints_seed, ops)
    _run_in({"c.json": data}, "c.json", lambda p: check("constraints-json", lambda: fw.load(p)))


@fuzz("constraints-def")
@given(ops=OPS)
def test_constraints_def(ops):
    _load_def("constraints-def", {"k.def": mutate_sections(CONSTRAINT_DEF, ops),
                                  "t.lef": TECH_LEF, "c.lef": CELL_LEF})


@fuzz("constraints-place")
@given(ops=OPS)
def test_constraints_place(constraints_seed, ops):
    # an accepted mutant is placed: a floorplan (every partial blockage within its cap when
    # the cells are legal) or a one-line DesignError / PlacementError, within the time limit
    from floorwidget.design import CELL
    from floorwidget.kernels.fill import covered_share

    # plausible values only (rectangles, densities, members, duplicates), so that most load
    ops = [(k if k in ("dup_line", "delete_line") else "number", a, b) for k, a, b in ops]
    data = mutate_constraints(constraints_seed, ops)
    with tempfile.TemporaryDirectory(prefix="fwfuzz") as t:
        p = Path(t) / "c.json"
        p.write_bytes(data)
        try:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore")
                design = fw.load(p)
        except DesignError:
            return
    COUNTS["constraints-place", "mutants"] += 1
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            with _time_limit(TIME_LIMIT):
                fp = fw.place(design)
                rep = fw.evaluate(design, fp)
        except DesignError as e:
            COUNTS["constraints-place", "rejected"] += 1
            assert "\n" not in str(e), f"more than one line: {e!r}"
            return
        except _Hang as e:
            raise AssertionError(f"constraints-place: {e}") from None
    COUNTS["constraints-place", "accepted"] += 1
    part = design.blockage_max_density > 0
    if rep.get("cells_legal", rep["legal"]) and part.any():
        fill = covered_share(design.blockages[part], fp.rects()[design.kind == CELL])
        assert (fill <= design.blockage_max_density[part] + 1e-9).all(), fill


CONSTRAINT_EDITS = ("add_blockage", "move_blockage", "set_blockage_density", "remove_blockage",
                    "set_halo", "add_region", "remove_region", "assign_group")


def test_every_constraint_surface_was_reached():
    """The harness itself (it runs after the fuzz tests above, in file order): every
    constraint edit was both taken and refused, edited sessions were placed, and the mutated
    constraint files were both read and refused, and some of them placed."""
    if not COUNTS["session_edits", "mutants"] or not COUNTS["constraints-place", "mutants"]:
        pytest.skip("the fuzz tests of the constraints did not run in this session")
    for op in CONSTRAINT_EDITS:
        assert COUNTS["session_edits", f"{op} taken"] > 0, f"{op} never taken"
        assert COUNTS["session_edits", f"{op} refused"] > 0, f"{op} never refused"
    assert COUNTS["session_edits", "placed"] > 0
    for fmt in ("constraints-json", "constraints-def"):
        assert COUNTS[fmt, "accepted"] > 0 and COUNTS[fmt, "rejected"] > 0, fmt
    assert COUNTS["constraints-place", "accepted"] > 0
