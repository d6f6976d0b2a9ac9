"""Comparison of two floorplans of one design: report deltas and the macros that changed."""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

from ..design import MACRO, ORIENTATIONS, STATUS_NAMES, Design, Floorplan

__all__ = ["Comparison"]


@dataclass
class Comparison:
    """What changed from floorplan ``a`` to floorplan ``b``.

    Attributes
    ----------
    a, b : str
        Labels.
    metrics : dict
        ``key -> (a_value, b_value, delta)`` for every report key; ``delta = b - a``
        (booleans count as 0/1).
    moved : list of (name, dx, dy, distance)
        Macros whose lower-left corner moved, largest distance first.
    reoriented : list of (name, orient_a, orient_b)
    status_changed : list of (name, status_a, status_b)
    others_moved : int
        Non-macro blocks (clusters, cells, terminals) that moved.
    """

    a: str
    b: str
    metrics: dict
    moved: list
    reoriented: list
    status_changed: list
    others_moved: int

    @classmethod
    def of(cls, design: Design, la: str, fa: Floorplan, ra: Mapping, lb: str, fb: Floorplan,
           rb: Mapping) -> Comparison:
        metrics = {}
        for k in list(ra) + [k for k in rb if k not in ra]:
            va, vb = ra.get(k), rb.get(k)
            try:
                delta = (float(vb) - float(va)) if va is not None and vb is not None else None
                if isinstance(va, (bool, np.bool_)) or isinstance(vb, (bool, np.bool_)):
                    delta = int(bool(vb)) - int(bool(va))
                elif isinstance(va, (int, np.integer)) and isinstance(vb, (int, np.integer)):
                    delta = int(vb) - int(va)
            except (TypeError, ValueError):
                delta = None
            metrics[k] = (va, vb, delta)
        dx, dy = fb.x - fa.x, fb.y - fa.y
        dist = np.hypot(dx, dy)
        macro = design.kind == MACRO
        mv = np.flatnonzero(macro & (dist > 0))
        mv = mv[np.argsort(-dist[mv], kind="stable")]
        names = design.names
        moved = [(names[i], float(dx[i]), float(dy[i]), float(dist[i])) for i in mv]
        ro = np.flatnonzero(fa.orient != fb.orient)
        reoriented = [(names[i], ORIENTATIONS[fa.orient[i]], ORIENTATIONS[fb.orient[i]])
                      for i in ro]
        st = np.flatnonzero(fa.status != fb.status)
        status_changed = [(names[i], STATUS_NAMES[fa.status[i]], STATUS_NAMES[fb.status[i]])
                          for i in st]
        return cls(la, lb, metrics, moved, reoriented, status_changed,
                   int(np.count_nonzero(~macro & (dist > 0))))

    def to_dict(self) -> dict:
        return {"a": self.a, "b": self.b,
                "metrics": {k: {"a": v[0], "b": v[1], "delta": v[2]}
                            for k, v in self.metrics.items()},
                "moved": [{"name": n, "dx": x, "dy": y, "distance": r}
                          for n, x, y, r in self.moved],
                "reoriented": [{"name": n, "a": o1, "b": o2} for n, o1, o2 in self.reoriented],
                "status_changed": [{"name": n, "a": s1, "b": s2}
                                   for n, s1, s2 in self.status_changed],
                "others_moved": self.others_moved}

    @staticmethod
    def _fmt(v) -> str:
        if v is None:
            return "-"
        if isinstance(v, (bool, np.bool_)):
            return "yes" if v else "no"
        if isinstance(v, (int, np.integer)):
            return f"{int(v):d}"
        if isinstance(v, (float, np.floating)):
            return f"{float(v):.6g}"
        return str(v)

    def __str__(self) -> str:
        rows = [("metric", self.a, self.b, "b - a")]
        for k, (va, vb, d) in self.metrics.items():
            ds = "-" if d is None else (f"{d:+d}" if isinstance(d, int) else f"{d:+.6g}")
            rows.append((k, self._fmt(va), self._fmt(vb), ds))
        wid = [max(len(r[c]) for r in rows) for c in range(4)]
        lines = ["  ".join(r[c].ljust(wid[c]) if c == 0 else r[c].rjust(wid[c])
                           for c in range(4)) for r in rows]
        lines.insert(1, "  ".join("-" * w for w in wid))
        lines.append("")
        if self.moved:
            lines.append(f"{len(self.moved)} macro(s) moved (µm):")
            nw = max(len(m[0]) for m in self.moved)
            lines.append(f"  {'macro'.ljust(nw)}  {'dx':>10}  {'dy':>10}  {'distance':>10}")
            for n, x, y, r in self.moved:
                lines.append(f"  {n.ljust(nw)}  {x:>+10.3f}  {y:>+10.3f}  {r:>10.3f}")
        else:
            lines.append("no macro moved")
        for n, o1, o2 in self.reoriented:
            lines.append(f"orientation {n}: {o1} -> {o2}")
        for n, s1, s2 in self.status_changed:
            lines.append(f"status {n}: {s1} -> {s2}")
        if self.others_moved:
            lines.append(f"{self.others_moved} other block(s) moved")
        lines.append("(early-floorplanning estimates, not sign-off figures)")
        return "\n".join(lines)

    def __repr__(self) -> str:
        return str(self)

    def _repr_html_(self) -> str:
        import html  # noqa: PLC0415
        return "<pre>" + html.escape(str(self)) + "</pre>"
