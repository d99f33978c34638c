"""Evaluate predicate IR on an Arrow record batch with pyarrow compute, as pandas would filter.

Missing values follow pandas: a comparison with a missing value keeps no row, except `!=`,
which keeps it (NaN != x is True); `isin` keeps no missing value and `not in` keeps them all;
`.str` tests keep no missing value unless `na=` says otherwise; `isna` counts NaN as missing.
The result is a boolean array without nulls. Only chainlint's IR is evaluated.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from chainlint.arrays import filled_numpy, packed_bits, to_numpy
from chainlint.evaluate.support import PARSES_NUMBERS, NotEvaluable, unevaluable
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

_COMPARE = {"==": pc.equal, "!=": pc.not_equal, "<": pc.less, "<=": pc.less_equal, ">": pc.greater, ">=": pc.greater_equal}
_ARITH = {"+": pc.add, "-": pc.subtract, "*": pc.multiply, "/": pc.divide, "**": pc.power}


def _value(batch: pa.RecordBatch, node: Node) -> Any:
    return _VALUE[node](batch, node)


def _column(batch: pa.RecordBatch, node: Column) -> Any:
    array = batch.column(batch.schema.get_field_index(node.name))
    if pa.types.is_dictionary(array.type):
        array = array.cast(array.type.value_type)
    return array


def _arith(batch: pa.RecordBatch, node: Arith) -> Any:
    if node.op not in _ARITH:
        return _unevaluable(batch, node)
    left, right = _value(batch, node.left), _value(batch, node.right)
    if node.op == "/":
        left = pc.cast(left, pa.float64()) if isinstance(left, pa.Array) else float(left)
    return _ARITH[node.op](left, right)


def _unevaluable(batch: pa.RecordBatch, node: Node) -> Any:
    raise NotEvaluable(unevaluable(node) or f"cannot evaluate {node.canonical()} with pyarrow")


def _parsed(batch: pa.RecordBatch, node: NumericTest) -> Any:
    raise NotEvaluable(PARSES_NUMBERS)


def _dictionary_operand(batch: pa.RecordBatch, node: Node) -> pa.DictionaryArray | None:
    operand = getattr(node, "operand", None) or getattr(node, "left", None)
    if not isinstance(operand, Column) or len(node.columns()) != 1:
        return None
    array = batch.column(batch.schema.get_field_index(operand.name))
    return array if isinstance(array, pa.DictionaryArray) else None


def _dictionary_answers(node: Node, array: pa.DictionaryArray) -> tuple[pa.Array, bool]:
    """The predicate on each of the (few) dictionary values, and on a missing value: a Parquet
    string column is compared once per distinct value instead of once per row."""
    (name,) = node.columns()
    values = pa.RecordBatch.from_arrays([array.dictionary], names=[name])
    missing = pa.RecordBatch.from_arrays([pa.nulls(1, array.dictionary.type)], names=[name])
    return arrow_mask(values, node), bool(arrow_mask(missing, node)[0].as_py())


def _through_dictionary(node: Node, array: pa.DictionaryArray) -> pa.Array:
    answers, missing = _dictionary_answers(node, array)
    return pc.fill_null(pc.take(answers, array.indices), missing)


def bit_mask(batch: pa.RecordBatch, node: Node) -> np.ndarray:
    """`arrow_mask` as packed bits (`chainlint.arrays.packed_bits`); a dictionary column's
    answers are spread by numpy indexing, several times faster than Arrow's `take` of booleans."""
    if isinstance(node, (Compare, Member, Range, NullTest, StrTest)):
        dictionary = _dictionary_operand(batch, node)
        if dictionary is not None:
            answers, missing = _dictionary_answers(node, dictionary)
            spread = np.append(to_numpy(answers), missing)  # a null index reads the last entry
            return packed_bits(np.take(spread, filled_numpy(dictionary.indices, len(answers))))
    return packed_bits(arrow_mask(batch, node))


def arrow_mask(batch: pa.RecordBatch, node: Node) -> pa.Array:
    """The rows of `batch` the predicate keeps, as a boolean array without nulls."""
    return _MASK[node](batch, node)


def _column_test(case: Callable[[pa.RecordBatch, Any], pa.Array]) -> Callable[[pa.RecordBatch, Any], pa.Array]:
    """A test of one column, answered through a dictionary column's values when it reads one."""
    def test(batch: pa.RecordBatch, node: Node) -> pa.Array:
        dictionary = _dictionary_operand(batch, node)
        return case(batch, node) if dictionary is None else _through_dictionary(node, dictionary)
    return test


def _compare(batch: pa.RecordBatch, node: Compare) -> pa.Array:
    result = _COMPARE[node.op](_value(batch, node.left), _value(batch, node.right))
    return pc.fill_null(result, node.op == "!=")


def _member(batch: pa.RecordBatch, node: Member) -> pa.Array:
    values = [v.value for v in node.values if isinstance(v, Literal)]  # type: ignore[union-attr]
    if len(values) != len(node.values):  # type: ignore[arg-type]
        raise NotEvaluable(unevaluable(node) or "membership in names")
    operand = _value(batch, node.operand)
    found = pc.fill_null(pc.is_in(operand, value_set=pa.array(values, type=operand.type) if values else pa.array([], type=operand.type)), False)
    return pc.invert(found) if node.negated else found


def _range(batch: pa.RecordBatch, node: Range) -> pa.Array:
    operand = _value(batch, node.operand)
    low = (pc.greater_equal if node.inclusive in ("both", "left") else pc.greater)(operand, _value(batch, node.low))
    high = (pc.less_equal if node.inclusive in ("both", "right") else pc.less)(operand, _value(batch, node.high))
    return pc.fill_null(pc.and_(low, high), False)


def _null_test(batch: pa.RecordBatch, node: NullTest) -> pa.Array:
    missing = pc.is_null(_value(batch, node.operand), nan_is_null=True)
    return pc.invert(missing) if node.negated else missing


def _row_nulls(batch: pa.RecordBatch, node: RowNulls) -> pa.Array:
    present = None
    for column in batch.columns:
        valid = pc.cast(pc.invert(pc.is_null(column, nan_is_null=True)), pa.int64())
        present = valid if present is None else pc.add(present, valid)
    if present is None:
        raise NotEvaluable("a frame without columns")
    need = node.thresh if node.thresh is not None else (batch.num_columns if node.how == "any" else 1)
    return pc.greater_equal(present, need)


def _combined(combine: Callable[[Any, Any], Any]) -> Callable[[pa.RecordBatch, Any], pa.Array]:
    def case(batch: pa.RecordBatch, node: And | Or) -> pa.Array:
        result = arrow_mask(batch, node.parts[0])
        for part in node.parts[1:]:
            result = combine(result, arrow_mask(batch, part))
        return result
    return case


def _string(batch: pa.RecordBatch, node: StrTest) -> pa.Array:
    operand = _value(batch, node.operand)
    pattern = _value(batch, node.pattern)
    options = {key: value.value for key, value in node.options if isinstance(value, Literal)}
    if len(options) != len(node.options) or not isinstance(pattern, str) or options.get("flags", 0):
        raise NotEvaluable(unevaluable(node) or "`.str` options chainlint cannot evaluate with pyarrow")
    ignore_case = options.get("case") is False
    if node.method == "startswith":
        result = pc.starts_with(operand, pattern, ignore_case=ignore_case)
    elif node.method == "endswith":
        result = pc.ends_with(operand, pattern, ignore_case=ignore_case)
    elif node.method == "contains" and options.get("regex") is False:
        result = pc.match_substring(operand, pattern, ignore_case=ignore_case)
    else:
        anchored = {"contains": pattern, "match": f"^(?:{pattern})", "fullmatch": f"^(?:{pattern})$"}[node.method]
        try:
            result = pc.match_substring_regex(operand, anchored, ignore_case=ignore_case)
        except pa.ArrowInvalid as error:
            raise NotEvaluable(f"pyarrow's regular expressions do not take `{pattern}` ({error})") from None
    na = options.get("na")
    return pc.fill_null(result, bool(na) if isinstance(na, bool) else False)


_VALUE: Cases[Callable[[pa.RecordBatch, Any], Any]] = Cases("pyarrow value", {
    Column: _column,
    Literal: lambda batch, node: node.value,
    Arith: _arith,
    (Named, Opaque, Compare, Member, Range, NullTest, NumericTest, StrTest, RowNulls, Not, And, Or): _unevaluable,
})

_MASK: Cases[Callable[[pa.RecordBatch, Any], pa.Array]] = Cases("pyarrow mask", {
    Compare: _column_test(_compare),
    Member: _column_test(_member),
    Range: _column_test(_range),
    NullTest: _column_test(_null_test),
    StrTest: _column_test(_string),
    NumericTest: _parsed,
    RowNulls: _row_nulls,
    Not: lambda batch, node: pc.invert(arrow_mask(batch, node.operand)),
    And: _combined(pc.and_),
    Or: _combined(pc.or_),
    (Column, Literal, Named, Arith, Opaque): _unevaluable,
})
