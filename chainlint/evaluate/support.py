"""What of the predicate IR can be evaluated on data at all, whichever engine evaluates it.

Kept apart from the pandas and pyarrow evaluators so that either can be loaded alone (the
profiler's pyarrow path never imports pandas).
"""

from __future__ import annotations

from chainlint.ir import Literal, Named, Node, NumericTest, Opaque
from chainlint.model import ChainlintError

_INT64 = (-(2**63), 2**63 - 1)


class NotEvaluable(ChainlintError):
    """The predicate has a part chainlint cannot evaluate (the message says which)."""


def unevaluable(node: Node) -> str | None:
    """Why `node` cannot be evaluated, or None when it can."""
    if isinstance(node, Opaque):
        return f"it calls `{node.text}`, which chainlint cannot follow without running your code"
    if isinstance(node, Named):
        return f"it reads the name `{node.name}`, whose value is only known when the code runs"
    if isinstance(node, Literal) and isinstance(node.value, int) and not _INT64[0] <= node.value <= _INT64[1]:
        return "it holds an integer literal outside the 64-bit range that data columns hold"
    for child in node.children():
        reason = unevaluable(child)
        if reason:
            return reason
    return None


#: Why the profiler, which evaluates with pyarrow, does not count a number parsed by pandas.
PARSES_NUMBERS = "it parses values as pandas' `to_numeric` does, which only pandas evaluates exactly"


def uncountable(node: Node) -> str | None:
    """Why the profiler cannot count `node` on data (it evaluates with pyarrow), or None."""
    reason = unevaluable(node)
    if reason:
        return reason
    return PARSES_NUMBERS if any(isinstance(part, NumericTest) for part in node.walk()) else None
