"""A check of replay scripts by their syntax tree: only the statements the script writer is
meant to produce, every argument a literal (``ast.literal_eval`` takes it) -- so no code from a
session file can have reached the script."""

from __future__ import annotations

import ast

from floorwidget.session import ACTIONS


def _literal(node: ast.AST) -> bool:
    if isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute) \
            and node.func.attr == "Floorplan" and isinstance(node.func.value, ast.Name) \
            and node.func.value.id == "fw":
        return (not node.keywords and isinstance(node.args[0], ast.Name)
                and node.args[0].id == "design" and all(map(_literal, node.args[1:])))
    if isinstance(node, ast.Call) and isinstance(node.func, ast.Name) \
            and node.func.id == "float":  # float('nan') and the like
        return len(node.args) == 1 and isinstance(node.args[0], ast.Constant) \
            and node.args[0].value in ("nan", "inf", "-inf")
    try:
        ast.literal_eval(node)
    except ValueError:
        return False
    return True


def _session_call(node: ast.AST, names: set) -> bool:
    return (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
            and isinstance(node.func.value, ast.Name) and node.func.value.id == "session"
            and node.func.attr in names and all(map(_literal, node.args))
            and all(k.arg is not None and k.arg.isidentifier() and _literal(k.value)
                    for k in node.keywords))


def _body_ok(stmts) -> bool:
    for st in stmts:
        if isinstance(st, ast.Expr) and _session_call(st.value, set(ACTIONS)):
            continue
        if isinstance(st, ast.With) and len(st.items) == 1 \
                and _session_call(st.items[0].context_expr, {"batch"}) and _body_ok(st.body):
            continue
        if isinstance(st, ast.Pass):
            continue
        return False
    return True


def script_is_data_only(code: str) -> bool:
    """Whether ``code`` is a replay script made of the expected statements with literal
    arguments only."""
    tree = ast.parse(code)
    head, body = [], []
    for st in tree.body:
        (body if body or _body_ok([st]) else head).append(st)
    for st in head:
        if isinstance(st, ast.Import) and [a.name for a in st.names] == ["floorwidget"]:
            continue
        if isinstance(st, ast.Assert):
            continue
        if isinstance(st, ast.Assign) and len(st.targets) == 1 \
                and isinstance(st.targets[0], ast.Name) \
                and st.targets[0].id in ("design", "initial", "session"):
            v = st.value
            if isinstance(v, ast.Call) and isinstance(v.func, ast.Attribute) \
                    and v.func.attr in ("load", "Session", "Floorplan") \
                    and all(_literal(a) or (isinstance(a, ast.Name)
                                            and a.id in ("design", "initial"))
                            for a in v.args) and all(_literal(k.value) for k in v.keywords):
                continue
        return False
    return _body_ok(body)
