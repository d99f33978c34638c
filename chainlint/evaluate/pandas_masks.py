"""Evaluate predicate IR on a pandas DataFrame as the boolean mask pandas itself would build.

Only chainlint's IR is evaluated, with pandas operations that have the meaning of the user's
filter (`==` on a column, `isin`, `between`, `.str` methods, `~`, `&`, `|`); nothing of the
user's code runs. A predicate with a part chainlint does not model cannot be evaluated.
"""

from __future__ import annotations

import operator
from collections.abc import Callable
from typing import Any

import pandas as pd

from chainlint.evaluate.support import NotEvaluable, unevaluable
from chainlint.ir import (
    And,
    Arith,
    Cases,
    Column,
    Compare,
    Literal,
    Member,
    Named,
    Node,
    Not,
    NullTest,
    NumericTest,
    Opaque,
    Or,
    Range,
    RowNulls,
    StrTest,
)

_COMPARE = {"==": operator.eq, "!=": operator.ne, "<": operator.lt, "<=": operator.le, ">": operator.gt, ">=": operator.ge}
_ARITH = {"+": operator.add, "-": operator.sub, "*": operator.mul, "/": operator.truediv, "//": operator.floordiv,
          "%": operator.mod, "**": operator.pow}


def mask(frame: pd.DataFrame, node: Node) -> Any:
    """The boolean mask (a Series aligned with `frame`) of `node`."""
    return _MASK[node](frame, node)


def _member(frame: pd.DataFrame, node: Member) -> Any:
    values = [mask(frame, v) for v in node.values]  # type: ignore[union-attr]
    test = mask(frame, node.operand).isin(values)
    return ~test if node.negated else test


def _null_test(frame: pd.DataFrame, node: NullTest) -> Any:
    column = mask(frame, node.operand)
    return column.notna() if node.negated else column.isna()


def _numeric_test(frame: pd.DataFrame, node: NumericTest) -> Any:
    parsed = pd.to_numeric(mask(frame, node.operand), errors="coerce")
    return parsed.isna() if node.negated else parsed.notna()


def _row_nulls(frame: pd.DataFrame, node: RowNulls) -> Any:
    present = frame.notna().sum(axis=1)
    need = node.thresh if node.thresh is not None else (frame.shape[1] if node.how == "any" else 1)
    return present >= need


def _str_test(frame: pd.DataFrame, node: StrTest) -> Any:
    options = {key: mask(frame, value) for key, value in node.options}
    return getattr(mask(frame, node.operand).str, node.method)(mask(frame, node.pattern), **options)


def _combined(combine: Callable[[Any, Any], Any]) -> Callable[[pd.DataFrame, Any], Any]:
    def case(frame: pd.DataFrame, node: And | Or) -> Any:
        result = mask(frame, node.parts[0])
        for part in node.parts[1:]:
            result = combine(result, mask(frame, part))
        return result
    return case


def _unevaluable(frame: pd.DataFrame, node: Node) -> Any:
    raise NotEvaluable(unevaluable(node) or f"cannot evaluate {node.canonical()}")


_MASK: Cases[Callable[[pd.DataFrame, Any], Any]] = Cases("pandas mask", {
    Column: lambda frame, node: frame[node.name],
    Literal: lambda frame, node: node.value,
    Arith: lambda frame, node: _ARITH[node.op](mask(frame, node.left), mask(frame, node.right)),
    Compare: lambda frame, node: _COMPARE[node.op](mask(frame, node.left), mask(frame, node.right)),
    Member: _member,
    Range: lambda frame, node: mask(frame, node.operand).between(mask(frame, node.low), mask(frame, node.high), inclusive=node.inclusive),
    NullTest: _null_test,
    NumericTest: _numeric_test,
    RowNulls: _row_nulls,
    StrTest: _str_test,
    Not: lambda frame, node: ~mask(frame, node.operand),
    And: _combined(operator.and_),
    Or: _combined(operator.or_),
    (Named, Opaque): _unevaluable,
})


def apply_step(frame: pd.DataFrame, node: Node) -> pd.DataFrame:
    """One filter step as pandas runs it: a boolean mask, then the rows it keeps."""
    return frame[mask(frame, node)]


def apply_group(frame: pd.DataFrame, nodes: list[Node]) -> pd.DataFrame:
    """Steps fused into one mask as pandas runs it: each mask on every row, joined with `&`,
    then the rows the joined mask keeps."""
    keep = mask(frame, nodes[0])
    for node in nodes[1:]:
        keep = keep & mask(frame, node)
    return frame[keep]
