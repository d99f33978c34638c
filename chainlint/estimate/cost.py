"""A cost model of pandas 3 boolean-mask filtering, in nanoseconds.

A step costs `n_in * (predicate + per-input-row take) + n_out * per-kept-row take + fixed`.
The figures shipped are `chainlint calibrate`'s own (`estimate/calibrate.py` says what each
times), the median of three runs on an idle 2-core machine (load average 0.8; pandas 3.1.1,
pyarrow 26.0.1, numpy 2.4.6; 2,000,000-row frames), so that a user who never calibrates plans
with the figures a calibration gives:
- predicate per input row: numeric `==`/`>` 1.0, float `between` 3.2, pyarrow `str` `==` 14 and
  `isin` 34 (codes of one width, which pyarrow compares in full), int `isin` 8.4, `.str.contains`
  of a literal 33 and of a regular expression 106, object `==` 89, category `==` 0.18 and
  `isin` 19, `isna` 1.1, each `&` 1.3 (plain and nullable masks);
- taking the kept rows: numeric columns 0.2 per input row in all, plus per kept row per column
  27 at 1%, 17 at 5%, 9 at 15%, 7.9 at 30%, 5.8 at 70% or more (scattered kept rows each cost a
  cache line; denser ones share them); pyarrow string columns 0.05 per input row per column,
  plus per kept row per column 96 at 1%, 56 at 5%, 23 at 15%, 17 at 30% or more; a mask that
  keeps every row copies nothing;
- a fixed cost per step: 0.10 ms, plus 0.037 ms for each column pandas holds as an array of its
  own (`str`, category, nullable: numpy columns share one block per dtype).
Kept rows that lie in runs (a filter on a column whose equal values are clustered in row order,
by the profile's `clustering`) are taken at the dense cost. Values marked "assumed" were not
measured; `CostModel` holds all of them so that a calibration can replace them.

The figures shipped before these (measured once on a 2,000,000 x 40 frame, the take curve at 5%
and 30% only, then rescaled by ratios taken under load) planned `benchmarks/plan_forms.py`'s
chains up to 1.48x slower than the fastest form in a quiet run in which the calibrated figures
stayed within 1.21; with the figures above every one of its 18 chains gets the plan the
calibrated model gave in that run.
Not modelled: pandas copies a pyarrow string column held in several chunks (as `read_parquet`
and `concat` give) whole on the first filter, whatever it keeps (about 10 ns per row and
column); every form of a chain pays it once, on its first copy, so it moves no plan.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np

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
from chainlint.profile.view import Profile


@dataclass(frozen=True)
class CostModel:
    compare: dict[str, float] = field(default_factory=lambda: {"numeric": 0.99, "str": 14.3, "object": 89.0, "category": 0.18})
    member: dict[str, float] = field(default_factory=lambda: {"numeric": 8.4, "str": 33.7, "object": 61.4, "category": 19.0})
    between: float = 3.2
    null_test: float = 1.1
    string_test: float = 33.1
    #: `.str.contains` of a regular expression (pandas' default), `.str.match`, `.str.fullmatch`.
    regex_test: float = 106.0
    arith: float = 0.7  # assumed, per operation
    combine: float = 1.27
    opaque: float = 10.0  # assumed
    numeric_take_in: float = 0.2
    string_take_in: float = 0.046
    numeric_take_kept: tuple[tuple[float, float], ...] = ((0.0, 26.7), (0.01, 26.7), (0.05, 17.2), (0.10, 14.6), (0.15, 9.1),
                                                          (0.20, 7.6), (0.30, 7.9), (0.70, 5.8), (1.0, 5.8))
    string_take_kept: tuple[tuple[float, float], ...] = ((0.0, 96.0), (0.01, 96.0), (0.05, 56.3), (0.10, 33.7), (0.15, 23.5),
                                                         (0.20, 21.5), (0.30, 16.8), (0.70, 16.9), (1.0, 16.9))
    fixed: float = 101_000.0
    #: Per column held as an array of its own (`str`, category, nullable), on top of `fixed`.
    fixed_per_column: float = 36_700.0
    #: Copying a kept row of a column of each kind, against the curve of its family (numeric
    #: for `numeric`, `nullable` and `category`, string for `str` and `object`), at 30% kept:
    #: nullable columns copy a value and a mask, categoricals their small codes; an object
    #: column measured 3.6 times a `str` one.
    take_weight: dict[str, float] = field(default_factory=lambda: {"numeric": 1.0, "nullable": 1.53, "category": 0.55,
                                                                   "str": 1.0, "object": 3.65})


DEFAULT_MODEL = CostModel()


@dataclass(frozen=True)
class FrameShape:
    """What the cost depends on in the frame: its column kinds, from the profile (`kinds` for
    predicates; `takes`, the kind each column is copied as, when it differs from `kinds`:
    `nullable` for pandas' masked dtypes)."""

    kinds: dict[str, str]
    takes: dict[str, str] = field(default_factory=dict)

    @cached_property
    def copied(self) -> dict[str, int]:
        """Columns by the kind they are copied as."""
        counts: dict[str, int] = {}
        for name, kind in self.kinds.items():
            kind = self.takes.get(name, kind)
            counts[kind] = counts.get(kind, 0) + 1
        return counts

    @cached_property
    def numeric_columns(self) -> int:
        return sum(n for kind, n in self.copied.items() if kind not in ("str", "object"))

    @cached_property
    def own_arrays(self) -> int:
        """Columns pandas holds as arrays of their own, not in a block shared by a dtype."""
        return sum(n for kind, n in self.copied.items() if kind in ("str", "category", "nullable"))

    @cached_property
    def string_columns(self) -> int:
        return sum(n for kind, n in self.copied.items() if kind in ("str", "object"))


def column_kind(pandas_type: str) -> str:
    """The kind a profile's dtype is priced as: pandas 3's `string` (missing values as NA) is
    pyarrow-backed like `str`, and priced as it (not measured apart)."""
    if pandas_type in ("str", "string"):
        return "str"
    if pandas_type == "object":
        return "object"
    if pandas_type == "category":
        return "category"
    return "numeric"


_NULLABLE = re.compile(r"U?Int(8|16|32|64)|Float(32|64)|boolean")


def shape_of(profile: Profile) -> FrameShape:
    return FrameShape({column.name: column_kind(column.dtype) for column in profile.columns},
                      {column.name: "nullable" for column in profile.columns if _NULLABLE.fullmatch(column.dtype)})


def predicate_cost(node: Node, shape: FrameShape, model: CostModel = DEFAULT_MODEL) -> float:
    """Nanoseconds per input row to evaluate the predicate."""
    return _COST[node](node, shape, model)


def _compare_cost(node: Compare, shape: FrameShape, model: CostModel) -> float:
    extra = sum(predicate_cost(side, shape, model) for side in (node.left, node.right) if isinstance(side, (Arith, Opaque)))
    return model.compare[_operand_kind(node, shape)] + extra


def _range_cost(node: Range, shape: FrameShape, model: CostModel) -> float:
    return model.between if _operand_kind(node, shape) != "str" else 2 * model.compare["str"]


def _numeric_test_cost(node: NumericTest, shape: FrameShape, model: CostModel) -> float:
    """Numbers pass through `to_numeric` as they are; text is parsed value by value, priced as a
    `.str` test (not calibrated on its own)."""
    return model.string_test if _operand_kind(node, shape) in ("str", "object") else model.null_test


def _row_nulls_cost(node: RowNulls, shape: FrameShape, model: CostModel) -> float:
    columns = max(len(shape.kinds), 1)
    return model.null_test * columns + model.combine * (columns - 1)


_COST: Cases[Callable[[Any, FrameShape, CostModel], float]] = Cases("predicate cost", {
    (And, Or): lambda node, shape, model: sum(predicate_cost(p, shape, model) for p in node.parts) + model.combine * (len(node.parts) - 1),
    Not: lambda node, shape, model: predicate_cost(node.operand, shape, model) + model.combine,
    Opaque: lambda node, shape, model: model.opaque,
    Arith: lambda node, shape, model: model.arith + predicate_cost(node.left, shape, model) + predicate_cost(node.right, shape, model),
    Compare: _compare_cost,
    Member: lambda node, shape, model: model.member[_operand_kind(node, shape)],
    Range: _range_cost,
    NullTest: lambda node, shape, model: model.null_test,
    NumericTest: _numeric_test_cost,
    StrTest: lambda node, shape, model: model.regex_test if _regex(node) else model.string_test,
    RowNulls: _row_nulls_cost,
    (Column, Literal, Named): lambda node, shape, model: 0.0,  # read as part of the test that uses them
})


def _regex(node: StrTest) -> bool:
    """Whether pandas runs the test as a regular expression (`contains` does unless told
    `regex=False`)."""
    if node.method in ("match", "fullmatch"):
        return True
    regex = dict(node.options).get("regex")
    return node.method == "contains" and not (isinstance(regex, Literal) and regex.value is False)


def _operand_kind(node: Node, shape: FrameShape) -> str:
    operand = getattr(node, "operand", None) or getattr(node, "left", None)
    if isinstance(operand, Column):
        return shape.kinds.get(operand.name, "numeric")
    return "numeric"


def _interpolate(points: tuple[tuple[float, float], ...], share: float) -> float:
    """Linear between the points (sorted by share), flat beyond them, as `numpy.interp`; in
    plain Python, since the planner asks it hundreds of thousands of times for a long chain."""
    if share <= points[0][0]:
        return points[0][1]
    for (x0, y0), (x1, y1) in zip(points, points[1:]):
        if share <= x1:
            return y0 if x1 == x0 else y0 + (y1 - y0) * (share - x0) / (x1 - x0)
    return points[-1][1]


def take_cost(rows_in: float, kept: float, shape: FrameShape, model: CostModel = DEFAULT_MODEL, clustered: float = 0.0) -> float:
    """Nanoseconds to copy the kept rows of every column; `kept` is the share kept.

    A few kept rows scattered over the frame cost more each than many (cache misses); kept
    rows that lie in runs (`clustered` near 1, as for a filter on a sorted column) cost what
    dense keeps cost, whatever their share.
    """
    if kept >= 1.0:
        return 0.0
    rows_out = rows_in * kept

    def per_row(points: tuple[tuple[float, float], ...]) -> float:
        return (1.0 - clustered) * _interpolate(points, kept) + clustered * points[-1][1]

    numeric_weight, string_weight = _weights(shape, model)
    numeric = rows_in * model.numeric_take_in + rows_out * numeric_weight * per_row(model.numeric_take_kept)
    strings = shape.string_columns * rows_in * model.string_take_in + rows_out * string_weight * per_row(model.string_take_kept)
    return numeric + strings


def _weights(shape: FrameShape, model: CostModel) -> tuple[float, float]:
    """The columns copied, numeric and string families, each weighted by its kind's cost."""
    weight, copied = model.take_weight, shape.copied
    return (sum(n * weight.get(kind, 1.0) for kind, n in copied.items() if kind not in ("str", "object")),
            sum(n * weight.get(kind, 1.0) for kind, n in copied.items() if kind in ("str", "object")))


def step_costs(rows_in: np.ndarray, predicate: np.ndarray, kept: np.ndarray, shape: FrameShape,
               model: CostModel = DEFAULT_MODEL, clustered: np.ndarray | float = 0.0) -> np.ndarray:
    """`step_cost` over arrays at once: the planner prices every group at every set of rows
    it may receive (3^12 of them for 12 steps)."""
    numeric_weight, string_weight = _weights(shape, model)

    def per_row(points: tuple[tuple[float, float], ...]) -> np.ndarray:
        shares, values = zip(*points)
        return (1.0 - clustered) * np.interp(kept, shares, values) + clustered * points[-1][1]

    rows_out = rows_in * kept
    numeric = rows_in * model.numeric_take_in + rows_out * numeric_weight * per_row(model.numeric_take_kept)
    strings = shape.string_columns * rows_in * model.string_take_in + rows_out * string_weight * per_row(model.string_take_kept)
    take = np.where(kept >= 1.0, 0.0, numeric + strings)
    return rows_in * predicate + take + fixed_cost(shape, model)


def step_cost(rows_in: float, predicate: float, kept: float, shape: FrameShape, model: CostModel = DEFAULT_MODEL,
              clustered: float = 0.0) -> float:
    """Nanoseconds for one step that receives `rows_in` rows and keeps the share `kept`."""
    return rows_in * predicate + take_cost(rows_in, kept, shape, model, clustered) + fixed_cost(shape, model)


def fixed_cost(shape: FrameShape, model: CostModel = DEFAULT_MODEL) -> float:
    """Nanoseconds a step costs whatever its rows: pandas visits each block of the frame, and
    each `str`, categorical or nullable column is a block of its own."""
    return model.fixed + model.fixed_per_column * shape.own_arrays
