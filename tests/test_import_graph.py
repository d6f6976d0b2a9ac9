"""The package's import graph has no circle (the layering of DEVELOPERS.md): every import of
one floorwidget module by another, at module level or inside a function, read with ``ast`` and
checked with networkx (``find_cycle``)."""

from __future__ import annotations

import ast
from pathlib import Path

import networkx as nx

ROOT = Path(__file__).resolve().parents[1] / "floorwidget"


def _module(path: Path) -> str:
    rel = path.relative_to(ROOT.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _graph() -> nx.DiGraph:
    g = nx.DiGraph()
    mods = {_module(p): p for p in ROOT.rglob("*.py")}
    for name, path in mods.items():
        g.add_node(name)
        pkg = name if path.name == "__init__.py" else name.rsplit(".", 1)[0]
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom):
                if node.level:
                    base = pkg.split(".")
                    base = base[:len(base) - node.level + 1]
                    target = ".".join(base + ([node.module] if node.module else []))
                else:
                    target = node.module or ""
                cands = [target] + [f"{target}.{a.name}" for a in node.names]
            elif isinstance(node, ast.Import):
                cands = [a.name for a in node.names]
            else:
                continue
            for c in cands:
                if c in mods and c != name and not name.startswith(c + "."):
                    g.add_edge(name, c)
    return g


def test_no_import_circle():
    g = _graph()
    assert g.number_of_nodes() > 50
    try:
        cycle = nx.find_cycle(g)
    except nx.NetworkXNoCycle:
        cycle = []
    assert cycle == [], f"import circle: {cycle}"


def test_core_layers_never_import_the_widget_toolkits():
    for path in ROOT.rglob("*.py"):
        if "widget" in path.relative_to(ROOT).parts:
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            names = [a.name for a in node.names] if isinstance(node, ast.Import) else \
                [node.module or ""] if isinstance(node, ast.ImportFrom) and not node.level else []
            for n in names:
                assert n.split(".")[0] not in ("ipywidgets", "bqplot", "ipyevents"), \
                    f"{path} imports {n}"
