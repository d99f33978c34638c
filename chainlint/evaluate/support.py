"""What of the predicate IR can be evaluated on data at all, whichever engine evaluates it.

Kept apart from the pandas and pyarrow evaluators so that either can be loaded alone (the
profiler's pyarrow path never imports pandas).
"""

from __future__ import annotations

from chainlint.ir import Named, Node, Opaque


class NotEvaluable(Exception):
    """The predicate has a part chainlint cannot evaluate (the message says which)."""


def unevaluable(node: Node) -> str | None:
    """Why `node` cannot be evaluated, or None when it can."""
    if isinstance(node, Opaque):
        return f"it holds code chainlint does not model (`{node.text}`)"
    if isinstance(node, Named):
        return f"it reads the name `{node.name}`, whose value is only known when the code runs"
    for child in node.children():
        reason = unevaluable(child)
        if reason:
            return reason
    return None
