"""Evaluate predicate IR on a pandas DataFrame as the boolean mask pandas itself would build.

Only chainlint's IR is evaluated, with pandas operations that have the meaning of the user's
filter (`==` on a column, `isin`, `between`, `.str` methods, `~`, `&`, `|`); nothing of the
user's code runs. A predicate with a part chainlint does not model cannot be evaluated.
"""

from __future__ import annotations

import operator
from typing import Any

import pandas as pd

from chainlint.evaluate.support import NotEvaluable, unevaluable
from chainlint.ir import (
    And,
    Arith,
    Column,
    Compare,
    Literal,
    Member,
    Node,
    Not,
    NullTest,
    RowNulls,
    Or,
    Range,
    StrTest,
)

_COMPARE = {"==": operator.eq, "!=": operator.ne, "<": operator.lt, "<=": operator.le, ">": operator.gt, ">=": operator.ge}
_ARITH = {"+": operator.add, "-": operator.sub, "*": operator.mul, "/": operator.truediv, "//": operator.floordiv,
          "%": operator.mod, "**": operator.pow}


def mask(frame: pd.DataFrame, node: Node) -> Any:
    """The boolean mask (a Series aligned with `frame`) of `node`."""
    if isinstance(node, Column):
        return frame[node.name]
    if isinstance(node, Literal):
        return node.value
    if isinstance(node, Arith):
        return _ARITH[node.op](mask(frame, node.left), mask(frame, node.right))
    if isinstance(node, Compare):
        return _COMPARE[node.op](mask(frame, node.left), mask(frame, node.right))
    if isinstance(node, Member):
        values = [mask(frame, v) for v in node.values]  # type: ignore[union-attr]
        test = mask(frame, node.operand).isin(values)
        return ~test if node.negated else test
    if isinstance(node, Range):
        return mask(frame, node.operand).between(mask(frame, node.low), mask(frame, node.high), inclusive=node.inclusive)
    if isinstance(node, NullTest):
        column = mask(frame, node.operand)
        return column.notna() if node.negated else column.isna()
    if isinstance(node, RowNulls):
        present = frame.notna().sum(axis=1)
        need = node.thresh if node.thresh is not None else (frame.shape[1] if node.how == "any" else 1)
        return present >= need
    if isinstance(node, StrTest):
        options = {key: mask(frame, value) for key, value in node.options}
        return getattr(mask(frame, node.operand).str, node.method)(mask(frame, node.pattern), **options)
    if isinstance(node, Not):
        return ~mask(frame, node.operand)
    if isinstance(node, And):
        result = mask(frame, node.parts[0])
        for part in node.parts[1:]:
            result = result & mask(frame, part)
        return result
    if isinstance(node, Or):
        result = mask(frame, node.parts[0])
        for part in node.parts[1:]:
            result = result | mask(frame, part)
        return result
    raise NotEvaluable(unevaluable(node) or f"cannot evaluate {node.canonical()}")


def apply_step(frame: pd.DataFrame, node: Node) -> pd.DataFrame:
    """One filter step as pandas runs it: a boolean mask, then the rows it keeps."""
    return frame[mask(frame, node)]
