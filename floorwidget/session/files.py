"""Session files: a :class:`~floorwidget.session.state.SessionState` written as versioned JSON
and read back, every part validated (the log against the action table).

Session file layout (JSON, version 1)::

    {
      "format": "floorwidget-session", "version": 1, "saved": "2026-...Z",
      "design": {"name": .., "source": "/abs/path.json", "source_relative": "../x.json",
                 "lef": ["/abs/tech.lef", ..], "lef_relative": ["../tech.lef", ..],
                 "num_blocks": n, "fingerprint": "sha256 hex", "clustered": false},
      "target_density": 0.8,
      "codes": {"orient": ["N", "S", ...], "status": ["movable", "pinned", "fixed"]},
      "initial": FLOORPLAN, "current": FLOORPLAN,
      "alternatives": [{"label": .., "note": .., "time": .., "params": {..} | null,
                        "report": {..}, "floorplan": FLOORPLAN}],
      "log": [{"op": "move", "args": ["ram0", 10.0, 20.0], "kwargs": {}},
              {"op": "batch", "label": "drag", "actions": [...]},
              {"op": "add_alternative", "args": ["a", {"floorplan": FLOORPLAN}], ...}],
      "history": {"undo": [STEP, ...], "redo": [STEP, ...]},
      "constraints": [CONSTRAINTS, ...]
    }

    FLOORPLAN = {"x": [..], "y": [..], "orient": [codes], "status": [codes], "info": {..},
                 "constraints": k}
    (an array longer than 20,000 entries is {"dtype": "<f8" | "|i1", "base64": ".."} instead:
    the raw little-endian bytes, exact and a tenth of the time to write and read)
    STEP = {"action": .., "idx": [..], "old": FLOORPLAN-of-idx, "new": FLOORPLAN-of-idx,
            "old_constraints": k, "new_constraints": k}     (both only on constraint edits)
    CONSTRAINTS = {"blockages": [[xlo, ylo, xhi, yhi], ..], "max_density": [..],
                   "halo": {"idx": [..], "values": [[l, b, r, t], ..]},
                   "regions": [{"name", "type", "rects", "group"}, ..],
                   "members": {"idx": [block, ..], "region": [k, ..]},
                   "power": GridSpec.to_dict() | null}   (power: only when set or cleared)

Blockages and halos edited in the session (:meth:`Session.add_blockage`, ``set_halo``, ...)
live on derived designs; ``"constraints"`` lists each distinct one once, its halos as the
rows that differ from the design file, and a floorplan or step names its entry by index
(``"constraints"`` absent: the design file's own).

A clustered session (``"clustered": true``) stores floorplans of the clustered design; loading
clusters the design file again (deterministic) and checks the fingerprint of the result.

Floats are written by :mod:`json` with ``repr``, which round-trips float64 exactly.  Orientation
and status are the integer codes listed under ``"codes"``.

A file is data: every logged action and keyword is checked against
:data:`floorwidget.session.actions.ACTIONS` and its values by type, and a block FIXED in the
design file must be FIXED in every floorplan and history step the file holds.
"""

from __future__ import annotations

import base64
import binascii
import hashlib
import json
import math
import os
from pathlib import Path
from typing import Any

import numpy as np

from ..design import (
    ORIENTATIONS,
    REGION_TYPES,
    STATUS_NAMES,
    CellRegions,
    Design,
    DesignError,
    Floorplan,
)
from ..floorplan.power import GridSpec, build_grid
from ..formats._io import atomic_write, read_json_file
from .actions import MAX_BATCH_DEPTH, check_entry
from .checks import fixed_freed
from .history import Step, freeze
from .state import Alternative, SessionState, cluster, now

__all__ = ["design_fingerprint", "load_state", "save_state", "LIST_LIMIT"]

SESSION_FORMAT = "floorwidget-session"
SESSION_VERSION = 1


def design_fingerprint(design: Design) -> str:
    """SHA-256 over the block names, kinds, sizes and net structure (detects a changed design)."""
    h = hashlib.sha256()
    h.update("\0".join(design.names).encode())
    for a in (design.kind, design.width, design.height, design.net_start, design.pin_block,
              design.die):
        h.update(np.ascontiguousarray(a).tobytes())
    return h.hexdigest()


# ---------------------------------------------------------------------------------------------
# writing


def _jsonable(v):
    """Plain JSON values; non-finite floats become the strings "nan", "inf", "-inf"."""
    if isinstance(v, Floorplan):
        return {"floorplan": _fp_doc(v)}
    if v is None or isinstance(v, (bool, str)):
        return v
    if isinstance(v, np.generic):
        v = v.item()
    if isinstance(v, int):
        return int(v)
    if isinstance(v, float):
        return v if math.isfinite(v) else repr(v)
    if isinstance(v, np.ndarray):
        return _jsonable(v.tolist())
    if isinstance(v, (list, tuple)):
        return [_jsonable(x) for x in v]
    if isinstance(v, dict):
        return {str(k): _jsonable(x) for k, x in v.items()}
    return repr(v)


def _info_doc(info: dict) -> dict:
    out = {}
    for k, v in info.items():
        try:
            out[str(k)] = json.loads(json.dumps(_jsonable(v), allow_nan=False))
        except (TypeError, ValueError):
            continue
    return out


LIST_LIMIT = 20_000  # arrays longer than this are stored as base64 of little-endian bytes


def _arr(a: np.ndarray, dtype: str):
    a = np.asarray(a)
    if len(a) <= LIST_LIMIT:
        return a.tolist()
    return {"dtype": dtype, "base64": base64.b64encode(
        np.ascontiguousarray(a, dtype=dtype).tobytes()).decode("ascii")}


def _fp_doc(fp, idx=None) -> dict:
    """Arrays of a floorplan (or, with ``idx``, a tuple ``x, y, orient, status``)."""
    x, y, o, s = (fp.x, fp.y, fp.orient, fp.status) if idx is None else fp
    return {"x": _arr(x, "<f8"), "y": _arr(y, "<f8"), "orient": _arr(o, "|i1"),
            "status": _arr(s, "|i1")}


def _step_doc(step) -> dict:
    return {"action": step.action, "idx": step.idx.tolist(),
            "old": _fp_doc(step.old, idx=True), "new": _fp_doc(step.new, idx=True),
            "old_info": _info_doc(step.old_info), "new_info": _info_doc(step.new_info)}


def _relative(src: str | None, path: Path | None) -> str | None:
    if src is None or path is None:
        return None
    try:
        return os.path.relpath(src, os.path.abspath(path.parent if str(path.parent) else "."))
    except ValueError:  # pragma: no cover - different drives
        return None


def _constraints_doc(design: Design, base: Design) -> dict:
    changed = np.flatnonzero((design.halo != base.halo).any(axis=1))
    mem = np.flatnonzero(design.regions.member >= 0)
    doc = {"blockages": design.blockages.tolist(),
           "max_density": design.blockage_max_density.tolist(),
           "halo": {"idx": changed.tolist(), "values": design.halo[changed].tolist()},
           "regions": design.regions.to_list(),
           "members": {"idx": mem.tolist(),
                       "region": design.regions.member[mem].tolist()}}
    if design.power is not base.power:  # a grid set (its specification) or cleared (null)
        doc["power"] = None if design.power is None else design.power.spec
    return doc


class _Designs:
    """Distinct constraint sets met while writing, numbered in order of first use."""

    def __init__(self, base: Design):
        self.base = base
        self.index: dict[int, int] = {}
        self.docs: list[dict] = []

    def ref(self, design: Design) -> int | None:
        if design is self.base:
            return None
        k = self.index.get(id(design))
        if k is None:
            k = self.index[id(design)] = len(self.docs)
            self.docs.append(_constraints_doc(design, self.base))
        return k


def session_document(state: SessionState, path: Path | None = None) -> dict:
    """The JSON document of ``state`` (``path``: where it goes, for the relative paths)."""
    d = state.base
    src = state.source
    lef = state.lef
    designs = _Designs(state.base)

    def fp_full(fp: Floorplan) -> dict:
        doc = _fp_doc(fp)
        doc["info"] = _info_doc(fp.info)
        k = designs.ref(fp.design)
        if k is not None:
            doc["constraints"] = k
        return doc

    def step_doc(step: Step) -> dict:
        doc = _step_doc(step)
        if step.old_design is not None:
            doc["old_constraints"] = designs.ref(step.old_design)
            doc["new_constraints"] = designs.ref(step.new_design)
        return doc

    return {
        "format": SESSION_FORMAT,
        "version": SESSION_VERSION,
        "saved": now(),
        "note": "figures are early-floorplanning estimates, not sign-off results",
        "design": {"name": d.name, "source": src, "source_relative": _relative(src, path),
                   "lef": lef, "lef_relative": [_relative(p, path) for p in lef],
                   "num_blocks": d.num_blocks, "fingerprint": design_fingerprint(d),
                   "clustered": state.clustered},
        "target_density": state.target_density,
        "codes": {"orient": list(ORIENTATIONS), "status": list(STATUS_NAMES)},
        "initial": fp_full(state.initial),
        "current": fp_full(state.current),
        "alternatives": [{"label": a.label, "note": a.note, "time": a.time,
                          "params": _jsonable(a.params), "report": _jsonable(dict(a.report)),
                          "floorplan": fp_full(a.floorplan)} for a in state.alternatives],
        "log": _jsonable(state.log),
        "history": {"undo": [step_doc(s) for s in state.undo],
                    "redo": [step_doc(s) for s in state.redo]},
        "constraints": designs.docs,
    }


def save_state(state: SessionState, path) -> None:
    """Write ``state`` to ``path`` atomically (see the module docstring for the layout)."""
    p = Path(path)
    try:
        # one top-level key per line (readable, diff-friendly) with the fast compact encoder
        doc = session_document(state, p)
        text = "{\n" + ",\n".join(f"{json.dumps(k)}: {json.dumps(v, allow_nan=False)}"
                                   for k, v in doc.items()) + "\n}"
    except (TypeError, ValueError) as e:
        raise DesignError(f"cannot write the session: {e}", file=str(p)) from None
    with atomic_write(p) as f:
        f.write(text)
        f.write("\n")


# ---------------------------------------------------------------------------------------------
# reading


class _Doc:
    """Checked access to a parsed JSON document; errors name the file and the JSON path."""

    def __init__(self, path: Path):
        self.path = str(path)

    def fail(self, where: str, msg: str):
        raise DesignError(f"{where}: {msg}", file=self.path, where=where)

    def obj(self, v, where: str) -> dict:
        if not isinstance(v, dict):
            self.fail(where, f"expected an object, got {type(v).__name__}")
        return v

    def get(self, obj: dict, key: str, where: str, default: Any = KeyError):
        self.obj(obj, where)
        if key not in obj:
            if default is KeyError:
                self.fail(where, f"missing {key!r}")
            return default
        return obj[key]

    def lst(self, v, where: str) -> list:
        if not isinstance(v, list):
            self.fail(where, f"expected a list, got {type(v).__name__}")
        return v

    def text(self, v, where: str) -> str:
        if not isinstance(v, str):
            self.fail(where, f"expected text, got {type(v).__name__}")
        return v

    def packed(self, v, dtype: str, where: str) -> np.ndarray:
        if v.get("dtype") != dtype or not isinstance(v.get("base64"), str):
            self.fail(where, f"expected a list or {{\"dtype\": \"{dtype}\", \"base64\": ..}}")
        try:
            raw = base64.b64decode(v["base64"], validate=True)
        except (binascii.Error, ValueError):
            self.fail(where, "damaged base64 data")
        size = np.dtype(dtype).itemsize
        if len(raw) % size:
            self.fail(where, f"base64 data is not a whole number of {size}-byte values")
        return np.frombuffer(raw, dtype=dtype).astype(np.dtype(dtype).newbyteorder("="))

    def floats(self, v, n: int | None, where: str) -> np.ndarray:
        if isinstance(v, dict):
            a = self.packed(v, "<f8", where)
            if n is not None and len(a) != n:
                self.fail(where, f"expected {n} numbers, got {len(a)}")
            if not np.isfinite(a).all():
                self.fail(f"{where}[{int(np.flatnonzero(~np.isfinite(a))[0])}]", "not finite")
            return a
        v = self.lst(v, where)
        if n is not None and len(v) != n:
            self.fail(where, f"expected {n} numbers, got {len(v)}")
        if not set(map(type, v)) <= {int, float}:
            k = next(i for i, e in enumerate(v) if type(e) not in (int, float))
            self.fail(f"{where}[{k}]", f"expected a number, got {v[k]!r}")
        a = np.array(v, dtype=np.float64)
        if not np.isfinite(a).all():
            k = int(np.flatnonzero(~np.isfinite(a))[0])
            self.fail(f"{where}[{k}]", "not finite")
        return a

    def codes(self, v, n: int | None, hi: int, where: str) -> np.ndarray:
        if isinstance(v, dict):
            a = self.packed(v, "|i1", where)
            if n is not None and len(a) != n:
                self.fail(where, f"expected {n} codes, got {len(a)}")
            bad = (a < 0) | (a >= hi)
            if bad.any():
                k = int(np.flatnonzero(bad)[0])
                self.fail(f"{where}[{k}]", f"expected a code 0..{hi - 1}, got {int(a[k])}")
            return a.astype(np.int8)
        v = self.lst(v, where)
        if n is not None and len(v) != n:
            self.fail(where, f"expected {n} codes, got {len(v)}")
        # checked as Python ints first: a code like 2**63 must not reach numpy
        k = next((i for i, e in enumerate(v) if type(e) is not int or not 0 <= e < hi), None)
        if k is not None:
            self.fail(f"{where}[{k}]", f"expected a code 0..{hi - 1}, got {v[k]!r}")
        return np.array(v, dtype=np.int8)

    def keeps_fixed(self, design: Design, vals: tuple, where: str,
                    idx: np.ndarray | None = None) -> None:
        """Refuse floorplan arrays ``x, y, orient, status`` (with ``idx``: of those blocks)
        that free a block FIXED in the design file (:func:`fixed_freed`)."""
        k = fixed_freed(design, vals[3], idx)
        if k is not None:
            self.fail(where, f"block {design.names[k]!r} is FIXED in the design file; a "
                             "session cannot make it movable or pinned")

    def fp_arrays(self, v, n: int | None, where: str):
        self.obj(v, where)
        x = self.floats(self.get(v, "x", where), n, where + ".x")
        m = len(x)
        y = self.floats(self.get(v, "y", where), m, where + ".y")
        o = self.codes(self.get(v, "orient", where), m, len(ORIENTATIONS), where + ".orient")
        s = self.codes(self.get(v, "status", where), m, len(STATUS_NAMES), where + ".status")
        return x, y, o, s

    def floorplan(self, design: Design, v, where: str, designs: list | None = None
                  ) -> Floorplan:
        x, y, o, s = self.fp_arrays(v, design.num_blocks, where)
        info = self.get(v, "info", where, {})
        self.keeps_fixed(design, (x, y, o, s), where)
        if designs is not None:
            design = self.design_ref(designs, design, v.get("constraints"),
                                     where + ".constraints")
        return Floorplan(design, x, y, o, s, self.obj(info, where + ".info"))

    def design_ref(self, designs: list, base: Design, k, where: str) -> Design:
        """The design a ``"constraints"`` index names (``None``: the design file's own)."""
        if k is None:
            return base
        if isinstance(k, bool) or not isinstance(k, int) or not 0 <= k < len(designs):
            self.fail(where, f"expected an index into constraints (0..{len(designs) - 1}), "
                             f"got {k!r}")
        return designs[k]

    def rects(self, v, where: str) -> np.ndarray:
        rows = self.lst(v, where)
        out = np.zeros((len(rows), 4))
        for i, r in enumerate(rows):
            out[i] = self.floats(r, 4, f"{where}[{i}]")
        return out

    def constraints(self, base: Design, v, where: str) -> Design:
        """A derived design from a CONSTRAINTS entry (validated, naming the entry)."""
        self.obj(v, where)
        bl = self.rects(self.get(v, "blockages", where, []), where + ".blockages")
        md = self.floats(self.get(v, "max_density", where, [0.0] * len(bl)), len(bl),
                         where + ".max_density")
        h = self.obj(self.get(v, "halo", where, {}), where + ".halo")
        idx = self.lst(h.get("idx", []), where + ".halo.idx")
        if not all(isinstance(i, int) and not isinstance(i, bool)
                   and 0 <= i < base.num_blocks for i in idx):
            self.fail(where + ".halo.idx", "expected block indices")
        vals = self.rects(h.get("values", []), where + ".halo.values")
        if len(vals) != len(idx):
            self.fail(where + ".halo.values", f"expected {len(idx)} halos, got {len(vals)}")
        halo = base.halo.copy()
        halo[np.array(idx, dtype=np.int64)] = vals
        regions = self.lst(self.get(v, "regions", where, []), where + ".regions")
        for k, r in enumerate(regions):
            w = f"{where}.regions[{k}]"
            self.text(self.get(r, "name", w), w + ".name")
            if self.get(r, "type", w) not in REGION_TYPES:
                self.fail(w + ".type", f"expected one of {', '.join(REGION_TYPES)}")
            self.rects(self.get(r, "rects", w), w + ".rects")
            if not isinstance(r.get("group", ""), str):
                self.fail(w + ".group", "expected text")
        mem = self.obj(self.get(v, "members", where, {}), where + ".members")
        midx = self.lst(mem.get("idx", []), where + ".members.idx")
        mreg = self.lst(mem.get("region", []), where + ".members.region")
        if len(midx) != len(mreg) or not all(
                isinstance(i, int) and not isinstance(i, bool) and 0 <= i < base.num_blocks
                for i in midx) or not all(isinstance(r, int) and not isinstance(r, bool)
                                          and 0 <= r < len(regions) for r in mreg):
            self.fail(where + ".members", "expected block indices and region indices")
        member = np.full(base.num_blocks, -1, np.int32)
        member[np.array(midx, dtype=np.int64)] = mreg
        power = {}
        if "power" in v:  # a grid set in the session (its specification) or cleared (null)
            p = v["power"]
            try:
                power["power"] = None if p is None else build_grid(base, GridSpec.from_dict(p))
            except DesignError as e:
                self.fail(where + ".power", e.message)
        try:
            return base.derive(blockages=bl, blockage_max_density=md, halo=halo,
                               regions=CellRegions.build(base.num_blocks, regions, member),
                               **power)
        except DesignError as e:
            self.fail(where, e.message)
        raise AssertionError  # pragma: no cover


def _read_log(doc: _Doc, design: Design, entries, where: str, depth: int = 0) -> list:
    """The log, its ``add_alternative`` floorplans read, every entry then checked against the
    action table (:func:`floorwidget.session.actions.check_entry`)."""
    if depth > MAX_BATCH_DEPTH:
        doc.fail(where, f"batches nested more than {MAX_BATCH_DEPTH} deep")
    out = []
    for k, e in enumerate(doc.lst(entries, where)):
        w = f"{where}[{k}]"
        doc.obj(e, w)
        e = dict(e)
        if e.get("op") == "batch":
            out.append({"op": "batch", "label": doc.text(doc.get(e, "label", w), w + ".label"),
                        "actions": _read_log(doc, design, doc.get(e, "actions", w),
                                             w + ".actions", depth + 1)})
            continue
        if e.get("op") == "add_alternative":
            args = list(doc.lst(e.get("args", []), w + ".args"))
            if len(args) != 2:
                doc.fail(w + ".args", "expected [label, {\"floorplan\": ...}]")
            fpd = doc.get(args[1], "floorplan", w + ".args[1]")
            vals = doc.fp_arrays(fpd, design.num_blocks, w + ".args[1].floorplan")
            doc.keeps_fixed(design, vals, w + ".args[1].floorplan")
            e["args"] = [args[0], freeze(Floorplan(design, *vals))]
        try:
            out.append(check_entry(e, w))
        except DesignError as err:
            raise DesignError(err.message, file=doc.path, where=w) from None
    return out


def _lef_list(doc: _Doc, p: Path, ref: dict) -> list[Path]:
    """The LEF libraries of the session's design: each absolute path, else its relative one."""
    lef = doc.lst(ref.get("lef", []), "design.lef")
    rel = ref.get("lef_relative")
    rel = doc.lst(rel, "design.lef_relative") if rel is not None else [None] * len(lef)
    if len(rel) != len(lef):
        doc.fail("design.lef_relative", "must list as many files as design.lef")
    out = []
    for k, (a, r) in enumerate(zip(lef, rel)):
        a = Path(doc.text(a, f"design.lef[{k}]"))
        if not a.is_file() and r is not None:
            b = p.parent / doc.text(r, f"design.lef_relative[{k}]")
            a = b if b.is_file() else a
        out.append(a)
    return out


def _find_design(doc: _Doc, p: Path, ref: dict) -> Design:
    from ..formats import load  # noqa: PLC0415
    src = ref.get("source")
    rel = ref.get("source_relative")
    cands = []
    if isinstance(src, str):
        cands.append(Path(src))
    if isinstance(rel, str):
        cands.append(p.parent / rel)
    lef = _lef_list(doc, p, ref)
    for c in cands:
        if c.is_file():
            return load(c, lef=lef or None)
    if not cands:
        doc.fail("design.source", "the session names no design file; pass design= to load()")
    doc.fail("design.source", f"design file {src or rel} not found; pass design= to load()")
    raise AssertionError  # pragma: no cover


def _step_designs(doc: _Doc, designs: list, base: Design, sd: dict, where: str
                  ) -> tuple[Design | None, Design | None]:
    """``(old, new)`` designs of a constraint edit in the history, else ``(None, None)``."""
    if "old_constraints" not in sd and "new_constraints" not in sd:
        return None, None
    return (doc.design_ref(designs, base, sd.get("old_constraints"), where + ".old_constraints"),
            doc.design_ref(designs, base, sd.get("new_constraints"), where + ".new_constraints"))


def _design_of(doc: _Doc, p: Path, ref: dict, design: Design | None):
    """``(full design, clustering or None, edited design)`` the file names, checked against
    its block count and fingerprint."""
    if design is None:
        design = _find_design(doc, p, ref)
    clustered = doc.get(ref, "clustered", "design", False)
    if not isinstance(clustered, bool):
        doc.fail("design.clustered", f"expected true or false, got {clustered!r}")
    # a clustered session: the same clustering again (it is deterministic), its coarsest level
    clustering = cluster(design, design.initial) if clustered else None
    base = design if clustering is None else clustering.coarsest
    n = doc.get(ref, "num_blocks", "design")
    if n != base.num_blocks:
        doc.fail("design.num_blocks", f"the session has {n!r} blocks, design {base.name!r} "
                                      f"has {base.num_blocks}")
    fpr = doc.get(ref, "fingerprint", "design", None)
    if fpr is not None and fpr != design_fingerprint(base):
        doc.fail("design.fingerprint", f"design {base.name!r} differs from the one this "
                                       "session was saved with")
    return design, clustering, base


def _alternatives(doc: _Doc, root: dict, design: Design, designs: list) -> list[Alternative]:
    alts = []
    labels = set()
    for k, a in enumerate(doc.lst(doc.get(root, "alternatives", "(top)", []), "alternatives")):
        w = f"alternatives[{k}]"
        label = doc.text(doc.get(a, "label", w), w + ".label")
        if label in labels:
            doc.fail(w + ".label", f"duplicate label {label!r}")
        labels.add(label)
        fp = freeze(doc.floorplan(design, doc.get(a, "floorplan", w), w + ".floorplan",
                                  designs))
        rep = doc.obj(doc.get(a, "report", w, {}), w + ".report")
        params = doc.get(a, "params", w, None)
        if params is not None:
            doc.obj(params, w + ".params")
        alts.append(Alternative(label, fp, dict(rep),
                                doc.text(doc.get(a, "note", w, ""), w + ".note"),
                                doc.text(doc.get(a, "time", w, ""), w + ".time"), params))
    return alts


def _steps(doc: _Doc, hist: dict, which: str, design: Design, designs: list) -> list[tuple]:
    """The steps of one stack as ``Step`` fields without their ids, oldest first."""
    steps = []
    for k, sd in enumerate(doc.lst(hist.get(which, []), f"history.{which}")):
        w = f"history.{which}[{k}]"
        action = doc.text(doc.get(sd, "action", w), w + ".action")
        idx = doc.lst(doc.get(sd, "idx", w), w + ".idx")
        if not all(isinstance(i, int) and not isinstance(i, bool)
                   and 0 <= i < design.num_blocks for i in idx):
            doc.fail(w + ".idx", "expected block indices")
        idx = np.array(idx, dtype=np.int64)
        old = doc.fp_arrays(doc.get(sd, "old", w), len(idx), w + ".old")
        new = doc.fp_arrays(doc.get(sd, "new", w), len(idx), w + ".new")
        steps.append((action, idx, old, new,
                      doc.obj(sd.get("old_info", {}), w + ".old_info"),
                      doc.obj(sd.get("new_info", {}), w + ".new_info"),
                      *_step_designs(doc, designs, design, sd, w)))
    if steps:  # one vectorised check of all steps; the loop only names the step at fault
        idx = np.concatenate([t[1] for t in steps])
        for side, j in (("old", 2), ("new", 3)):
            if fixed_freed(design, np.concatenate([t[j][3] for t in steps]), idx) is not None:
                for k, t in enumerate(steps):
                    doc.keeps_fixed(design, t[j], f"history.{which}[{k}].{side}", t[1])
    return steps


def _history(doc: _Doc, root: dict, design: Design, designs: list, current: Floorplan
             ) -> tuple[list[Step], list[Step], int]:
    """Undo and redo stacks with state ids 1.. (undo chain oldest first, the current floorplan
    at the end of it, the redo chain going on from there), and the current id."""
    hist = doc.obj(doc.get(root, "history", "(top)", {}), "history")
    undo = _steps(doc, hist, "undo", design, designs)
    redo = _steps(doc, hist, "redo", design, designs)
    # the undo chain must end at the current floorplan, and the redo chain start there
    for which, stack, vals in (("undo", undo, 3), ("redo", redo, 2)):
        if stack:
            idx, v = stack[-1][1], stack[-1][vals]
            if not all(np.array_equal(np.asarray(getattr(current, f))[idx], a)
                       for f, a in zip(("x", "y", "orient", "status"), v)):
                doc.fail(f"history.{which}", "does not match the current floorplan")
    K = len(undo)
    undo_steps = [Step(*t[:6], k + 1, k + 2, *t[6:]) for k, t in enumerate(undo)]
    redo_steps = [Step(*t[:6], K + k + 1, K + k + 2, *t[6:])
                  for k, t in enumerate(redo[::-1])][::-1]  # the next to redo is the last
    return undo_steps, redo_steps, K + 1


def load_state(path, design: Design | None = None) -> SessionState:
    """Read a session file (see the module docstring); :class:`DesignError` naming the file
    and the JSON path (or line, for a syntax error) when anything is wrong."""
    p = Path(path)
    root = read_json_file(p)
    doc = _Doc(p)
    doc.obj(root, "(top)")
    fmt = doc.get(root, "format", "(top)")
    if fmt != SESSION_FORMAT:
        doc.fail("format", f"expected {SESSION_FORMAT!r}, got {fmt!r}")
    ver = doc.get(root, "version", "(top)")
    if ver != SESSION_VERSION:
        doc.fail("version", f"unsupported version {ver!r} (this release reads version "
                            f"{SESSION_VERSION})")
    ref = doc.obj(doc.get(root, "design", "(top)"), "design")
    full, clustering, design = _design_of(doc, p, ref, design)
    codes = doc.obj(doc.get(root, "codes", "(top)", {}), "codes")
    if codes.get("orient", list(ORIENTATIONS)) != list(ORIENTATIONS) or \
            codes.get("status", list(STATUS_NAMES)) != list(STATUS_NAMES):
        doc.fail("codes", "orientation or status codes differ from this release's")
    td = doc.get(root, "target_density", "(top)", 0.8)
    if isinstance(td, bool) or not isinstance(td, (int, float)) or not math.isfinite(td) \
            or not 0 < td <= 1:
        doc.fail("target_density", f"expected a number in (0, 1], got {td!r}")
    designs = [doc.constraints(design, c, f"constraints[{k}]") for k, c in
               enumerate(doc.lst(doc.get(root, "constraints", "(top)", []), "constraints"))]
    initial = freeze(doc.floorplan(design, doc.get(root, "initial", "(top)"), "initial"))
    current = freeze(doc.floorplan(design, doc.get(root, "current", "(top)"), "current",
                                   designs))
    alts = _alternatives(doc, root, design, designs)
    log = _read_log(doc, design, doc.get(root, "log", "(top)", []), "log")
    undo, redo, sid = _history(doc, root, design, designs, current)
    full_initial = freeze((initial if clustering is None else full.initial).copy())
    return SessionState(full, full_initial, clustering, design, float(td), initial, current,
                        alts, log, undo, redo, sid)
