"""The session package's structure: no import circle through it, modules and functions of a
readable size, and files and scripts written from the plain state, not a Session's fields.

The import graph counts every ``import`` statement, also those inside functions, and a module
imports the packages above it (its own excepted: Python runs them before it anyway); a circle
is a strongly connected component of more than one module (networkx, Hagberg, Schult, Swart,
SciPy 2008; Tarjan's algorithm, SIAM J. Comput. 1972).
"""

from __future__ import annotations

import ast
import re
from pathlib import Path

import networkx as nx

ROOT = Path(__file__).resolve().parents[1] / "floorwidget"


def _module(path: Path) -> str:
    parts = list(path.relative_to(ROOT.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _imports(path: Path) -> set[str]:
    mod = _module(path)
    pkg = mod if path.name == "__init__.py" else mod.rsplit(".", 1)[0]
    out = set()
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.Import):
            out.update(a.name for a in node.names)
        elif isinstance(node, ast.ImportFrom):
            base = pkg.split(".")
            if node.level:
                base = base[:len(base) - node.level + 1]
                name = ".".join(base + ([node.module] if node.module else []))
            else:
                name = node.module or ""
            out.add(name)
            out.update(f"{name}.{a.name}" for a in node.names)
    return {m for m in out if m.split(".")[0] == "floorwidget"}


def _graph() -> nx.DiGraph:
    files = {_module(p): p for p in ROOT.rglob("*.py")}
    g = nx.DiGraph()
    for mod, path in files.items():
        for target in _imports(path):
            while target and target not in files:  # "from x import name": the module x
                target = target.rpartition(".")[0]
            parts = target.split(".")
            for k in range(1, len(parts) + 1):  # importing a.b.c runs a and a.b first
                dep = ".".join(parts[:k])
                if dep in files and dep != mod and not mod.startswith(dep + "."):
                    g.add_edge(mod, dep)
    return g


def test_no_import_circle_through_the_session():
    g = _graph()
    assert g.has_edge("floorwidget.session.core", "floorwidget.session.history")  # sanity
    for comp in nx.strongly_connected_components(g):
        ses = [m for m in comp if m.startswith(("floorwidget.session", "floorwidget.session_io"))]
        assert len(comp) == 1 or not ses, f"import circle: {sorted(comp)}"


def test_modules_and_functions_are_of_readable_size():
    for path in (ROOT / "session").glob("*.py"):
        text = path.read_text()
        assert text.count("\n") <= 800, path.name
        for node in ast.walk(ast.parse(text)):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                assert node.end_lineno - node.lineno < 120, f"{path.name}: {node.name}"


def test_files_and_scripts_use_the_state_only():
    """The file and script writers import neither the Session class nor touch private fields
    of a session object."""
    for name in ("files.py", "script.py", "state.py", "actions.py"):
        text = (ROOT / "session" / name).read_text()
        assert "from .core" not in text and "import core" not in text, name
        assert not re.search(r"\b(session|s)\._[a-z]", text), name


def test_one_list_of_action_names():
    """The action names appear as a list in one place only (the table), not again in the log
    checker or the script writer."""
    for name in ("files.py", "script.py", "core.py"):
        text = (ROOT / "session" / name).read_text()
        assert '"set_blockage_density"' not in text and '"assign_group"' not in text, name
