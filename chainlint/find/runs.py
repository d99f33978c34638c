"""What a statement run may span: the statements between its filters that it may step over,
the in-place `dropna`, and masks bound to a name before the chain.

A run continues through a simple statement that neither reads nor writes any frame of the run
(a log line, an unrelated assignment): moving a filter across it changes nothing either sees.
One that binds a name a filter of the run reads stays between the filters around it (the
filter after it becomes a barrier). Anything else ends the run.
"""

from __future__ import annotations

import ast

#: Statements a run may step over (never control flow: a `return` between filters is a branch;
#: never `pass`, which separates a notebook's cells, since a run never spans two cells).
_SIMPLE = (ast.Expr, ast.Assign, ast.AnnAssign, ast.AugAssign, ast.Import, ast.ImportFrom)


def mentioned(node: ast.AST) -> set[str]:
    """Every name a statement or expression reads or writes."""
    return {n.id for n in ast.walk(node) if isinstance(n, ast.Name)}


def bound(statement: ast.stmt) -> set[str]:
    """Names a statement binds or may change: assignment targets, the owners of assigned items
    and attributes, and objects whose methods it calls with `inplace=` or that mutate."""
    names: set[str] = set()
    for node in ast.walk(statement):
        if isinstance(node, ast.Name) and isinstance(node.ctx, (ast.Store, ast.Del)):
            names.add(node.id)
        elif isinstance(node, (ast.Attribute, ast.Subscript)) and isinstance(node.ctx, (ast.Store, ast.Del)):
            root = node.value
            while isinstance(root, (ast.Attribute, ast.Subscript)):
                root = root.value
            if isinstance(root, ast.Name):
                names.add(root.id)
        elif isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute) and isinstance(node.func.value, ast.Name):
            names.add(node.func.value.id)
        elif isinstance(node, ast.NamedExpr):
            names.add(node.target.id)
    return names


class Walked:
    """`mentioned` and `bound` of a block's statements, each statement walked once: the scan for
    runs passes the same statements again from every filter statement before them."""

    def __init__(self) -> None:
        self._mentioned: dict[int, set[str]] = {}
        self._bound: dict[int, set[str]] = {}

    def bound(self, statement: ast.stmt) -> set[str]:
        found = self._bound.get(id(statement))
        if found is None:
            found = self._bound[id(statement)] = bound(statement)
        return found

    def steps_over(self, statement: ast.stmt, frames: set[str]) -> bool:
        """Whether a run may continue across `statement` (`frames`: the run's frame names so
        far). Where it binds a name a filter reads, no step may cross it: the run marks a
        barrier there."""
        if not isinstance(statement, _SIMPLE):
            return False
        found = self._mentioned.get(id(statement))
        if found is None:
            found = self._mentioned[id(statement)] = mentioned(statement)
        return not (found & frames)


def inplace_dropna(statement: ast.stmt) -> ast.Call | None:
    """The call of a statement `frame.dropna(..., inplace=True)`, on a plain name."""
    if not (isinstance(statement, ast.Expr) and isinstance(statement.value, ast.Call)):
        return None
    call = statement.value
    func = call.func
    if not (isinstance(func, ast.Attribute) and func.attr == "dropna" and isinstance(func.value, ast.Name)):
        return None
    flag = next((k.value for k in call.keywords if k.arg == "inplace"), None)
    if isinstance(flag, ast.Constant) and flag.value is True:
        return call
    return None


def read_elsewhere(scope: ast.AST, name: str, run: list[ast.stmt]) -> bool:
    """Whether `name` is read anywhere in `scope` outside the statements of the run (a read
    inside the run is a barrier of its own: a mask of another frame, or a name the run assigns)."""
    inside = {id(n) for statement in run for n in ast.walk(statement)}
    for node in ast.walk(scope):
        if isinstance(node, ast.Name) and node.id == name and isinstance(node.ctx, ast.Load) and id(node) not in inside:
            return True
    return False
