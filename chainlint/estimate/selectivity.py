"""Selectivity of a predicate from a profile: the share of the rows it receives that it keeps.

Methods (every estimate carries its basis, weakest part wins):
- equality: the most-common-values list; for a value not listed, the rest spread evenly over
  the other distinct values, (1 - sum of MCV shares - null share) / (distinct - number of MCVs),
  as PostgreSQL's planner documents ("Row Estimation Examples");
- ranges: interpolation in the equi-depth histogram, using the MCV share at the bound;
- membership: sums of equalities; null tests: exact; `.str` tests: evaluated over the listed
  values, the rest at the default pattern selectivity;
- `not`, `and`, `or`: under independence.
Defaults where nothing is known are PostgreSQL's (src/include/utils/selfuncs.h, from memory):
0.005 for equality and pattern matches, 1/3 for inequalities.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable
from dataclasses import dataclass
from enum import Enum
from typing import Any

import numpy as np

from chainlint.estimate.cost import shape_of
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
from chainlint.profile.view import BELOW, ColumnProfile, Profile
from chainlint.redaction import redact_value

DEFAULT_EQ = 0.005
DEFAULT_INEQ = 1.0 / 3.0
DEFAULT_MATCH = 0.005
#: A default guess, not a measurement: a column code parses for numbers mostly holds them.
DEFAULT_NUMERIC = 0.9
#: Text pandas' `to_numeric` reads as a number (checked against pandas 3.1 in the tests); "nan"
#: reads as a missing value.
_NUMBER_TEXT = re.compile(r"\s*[+-]?(?:(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?|inf(?:inity)?)\s*", re.IGNORECASE | re.ASCII)

class Basis(Enum):
    """What an estimate rests on, from strongest to weakest (the value is how reports name it)."""

    JOINT = "joint (exact)"
    EXACT = "exact"
    MOST_COMMON = "most-common"
    HISTOGRAM = "histogram"
    DEFAULT = "default"


_STRENGTH = list(Basis)


@dataclass(frozen=True)
class Estimate:
    selectivity: float
    basis: Basis


def _weakest(*bases: Basis) -> Basis:
    return max(bases, key=_STRENGTH.index)


def _clip(value: float) -> float:
    return min(1.0, max(0.0, value))


class ColumnStats:
    """One column of a profile, read for estimation."""

    def __init__(self, column: ColumnProfile, key: bytes) -> None:
        rows = max(column.rows, 1)
        self.rows = rows
        self.null_share = column.nulls / rows
        self.redacted = column.redacted
        self.key = key
        top = column.top
        self.mcv: dict[Any, float] = {}
        for value, count in top.values if top is not None else ():
            self.mcv[_normal(value)] = count / rows
        self.complete = top is not None and top.exact and top.complete
        self.suppressed_values = column.suppressed_values
        self.suppressed_share = column.suppressed_rows / rows
        self.distinct = max(int(column.distinct.value if column.distinct is not None else 0), len(self.mcv))
        self.temporal = column.dtype.startswith("datetime")
        bounds = column.histogram.bounds if column.histogram is not None else None
        self.bounds = None
        if bounds and not self.temporal and all(isinstance(b, (int, float)) for b in bounds):
            self.bounds = np.array(bounds, dtype=np.float64)
        elif bounds and self.temporal:
            instants = [_instant(b) for b in bounds]
            if all(i is not None for i in instants):
                self.bounds = np.array(instants, dtype=np.float64)
        self.type = column.dtype

    def lookup(self, value: Any) -> Any:
        return redact_value(self.key, value) if self.redacted else _normal(value)

    def equal(self, value: Any) -> Estimate:
        key = self.lookup(value)
        if key in self.mcv:
            return Estimate(self.mcv[key], Basis.EXACT if self.complete else Basis.MOST_COMMON)
        if self.complete:
            if self.suppressed_values == 0:
                return Estimate(0.0, Basis.EXACT)
            return Estimate(self.suppressed_share / self.suppressed_values, Basis.MOST_COMMON)
        others = self.distinct - len(self.mcv)
        if others <= 0:
            return Estimate(0.0, Basis.MOST_COMMON)
        rest = 1.0 - sum(self.mcv.values()) - self.null_share
        return Estimate(_clip(rest / others), Basis.MOST_COMMON)

    def below(self, value: float, inclusive: bool) -> Estimate:
        """Share of all rows with a non-null value < value (or <=); a date string against a
        datetime column is read as pandas reads it, an instant."""
        numeric = _instant(value) if self.temporal else _number(value)
        if numeric is None:
            return Estimate(DEFAULT_INEQ, Basis.DEFAULT)
        if self.complete and not self.suppressed_values and self.mcv and all(_number(v) is not None for v in self.mcv):
            share = sum(s for v, s in self.mcv.items() if (_number(v) <= numeric if inclusive else _number(v) < numeric))
            return Estimate(_clip(share), Basis.EXACT)
        if self.bounds is None:
            return Estimate(DEFAULT_INEQ, Basis.DEFAULT)
        bounds = self.bounds
        buckets = len(bounds) - 1
        non_null = 1.0 - self.null_share
        if numeric < bounds[0]:
            return Estimate(0.0, Basis.HISTOGRAM)
        if numeric > bounds[-1]:
            return Estimate(non_null, Basis.HISTOGRAM)
        low = int(np.searchsorted(bounds, numeric, side="left"))
        high = int(np.searchsorted(bounds, numeric, side="right"))
        if low == high:
            left, right = bounds[low - 1], bounds[low]
            fraction = (low - 1 + (numeric - left) / (right - left)) / buckets
            return Estimate(_clip(fraction * non_null), Basis.HISTOGRAM)
        # `value` is a bound: F(value) lies in [(high-1)/B, high/B), F(value-) in [(low-1)/B, low/B).
        at_most = 1.0 if high > buckets else (high - 0.5) / buckets
        below = 0.0 if low == 0 else (low - 0.5) / buckets
        if not inclusive:
            equal = self.mcv.get(self.lookup(value))
            at_most = at_most - equal / max(non_null, 1e-12) if equal is not None else below
        return Estimate(_clip(at_most * non_null), Basis.HISTOGRAM)


def _normal(value: Any) -> Any:
    if isinstance(value, float) and value.is_integer():
        return int(value)
    return value


def _instant(value: Any) -> float | None:
    """Nanoseconds since the epoch of an ISO date or timestamp string (naive), else None."""
    if not isinstance(value, str):
        return None
    try:
        return float(np.datetime64(value, "ns").astype(np.int64))
    except ValueError:
        return None


def _number(value: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return None
    try:
        return float(value)
    except OverflowError:  # an integer literal beyond the float range lies past every bound
        return math.inf if value > 0 else -math.inf


class Estimator:
    """Selectivities of IR nodes against one profile."""

    def __init__(self, profile: Profile, key: bytes = b"") -> None:
        self.profile = profile
        self.columns = {column.name: ColumnStats(column, key) for column in profile.columns}
        self.shape = shape_of(profile)
        self.rows = max(profile.rows, 1)
        below = profile.settings.min_count / 2
        # Joint counts (profile --for): per set of predicate texts, rows passing each subset.
        self.joint: list[tuple[dict[str, int], dict[int, float]]] = []
        for entry in profile.joint or ():
            positions = {text: bit for bit, text in enumerate(entry.predicates)}
            counts = {int(mask): (below if count == BELOW else float(count)) for mask, count in entry.subsets}
            self.joint.append((positions, counts))

    def clustering(self, node: Node) -> float:
        """How much the rows a test of one column keeps lie in runs (the column's clustering);
        0 for anything else."""
        columns = node.columns()
        if len(columns) != 1 or not isinstance(node, (Compare, Member, Range, NullTest, NumericTest, StrTest)):
            return 0.0
        (name,) = columns
        column = self.profile.column(name)
        return column.clustering if column is not None else 0.0

    def joint_share(self, texts: frozenset[str]) -> float | None:
        """The exact share of rows passing all of `texts` together, when a joint entry has it."""
        for positions, counts in self.joint:
            if texts <= positions.keys():
                mask = sum(1 << positions[t] for t in texts)
                return counts.get(mask, 0.0) / self.rows
        return None

    def joint_covers(self, texts: frozenset[str]) -> bool:
        return any(texts <= positions.keys() for positions, _ in self.joint)

    def estimate(self, node: Node) -> Estimate:
        return _ESTIMATE[node](self, node)

    def _not(self, node: Not) -> Estimate:
        inner = self.estimate(node.operand)
        return Estimate(_clip(1.0 - inner.selectivity), inner.basis)

    def _and(self, node: And) -> Estimate:
        parts = [self.estimate(p) for p in node.parts]
        return Estimate(math.prod(p.selectivity for p in parts), _weakest(*(p.basis for p in parts)))

    def _or(self, node: Or) -> Estimate:
        parts = [self.estimate(p) for p in node.parts]
        keep = 1.0 - math.prod(1.0 - p.selectivity for p in parts)
        return Estimate(keep, _weakest(*(p.basis for p in parts)))

    def _null_test(self, node: NullTest) -> Estimate:
        stats = self._stats(node)
        if stats is None:
            return Estimate(1.0 - DEFAULT_EQ if node.negated else DEFAULT_EQ, Basis.DEFAULT)
        return Estimate(1.0 - stats.null_share if node.negated else stats.null_share, Basis.EXACT)

    def _numeric_test(self, node: NumericTest) -> Estimate:
        """Numbers and booleans pass through `to_numeric` (only the missing fail); datetimes
        always pass (pandas turns a missing instant into an integer); text by the listed values
        that read as numbers, the rest at a default guess."""
        stats = self._stats(node)
        if stats is None or stats.redacted:
            share, basis = DEFAULT_NUMERIC, Basis.DEFAULT
        elif stats.type.startswith(("datetime", "timedelta")):
            share, basis = 1.0, Basis.EXACT
        elif stats.type in ("str", "string", "object", "category"):
            listed = sum(share for value, share in stats.mcv.items() if reads_as_number(value))
            rest = _clip(1.0 - sum(stats.mcv.values()) - stats.null_share)
            share, basis = _clip(listed + rest * DEFAULT_NUMERIC), Basis.MOST_COMMON
        elif stats.type.lower().startswith(("int", "uint", "float", "bool")):
            share, basis = 1.0 - stats.null_share, Basis.EXACT
        else:
            share, basis = DEFAULT_NUMERIC, Basis.DEFAULT
        return Estimate(_clip(1.0 - share if node.negated else share), basis)

    def _not_a_test(self, node: Node) -> Estimate:
        """A value or a part chainlint does not model where a test belongs: the default."""
        return Estimate(DEFAULT_INEQ, Basis.DEFAULT)

    def _row_nulls(self, node: RowNulls) -> Estimate:
        """Rows with at least `need` values present, columns taken as independent."""
        present = [1.0 - stats.null_share for stats in self.columns.values()]
        need = node.thresh if node.thresh is not None else (len(present) if node.how == "any" else 1)
        # Distribution of the number of present values (a Poisson binomial), by dynamic programming.
        counts = [1.0]
        for share in present:
            counts = [(counts[k] if k < len(counts) else 0.0) * (1 - share) + (counts[k - 1] * share if k > 0 else 0.0)
                      for k in range(len(counts) + 1)]
        return Estimate(_clip(sum(counts[max(need, 0):])), Basis.EXACT if len(present) <= 1 else Basis.MOST_COMMON)

    def _stats(self, node: Node) -> ColumnStats | None:
        operand = getattr(node, "operand", None) or getattr(node, "left", None)
        if isinstance(operand, Column):
            return self.columns.get(operand.name)
        return None

    def _compare(self, node: Compare, stats: ColumnStats | None) -> Estimate:
        literal = node.right.value if isinstance(node.right, Literal) else None
        known = stats is not None and isinstance(node.right, Literal) and literal is not None
        if node.op in ("==", "!="):
            if not known:
                equal = Estimate(DEFAULT_EQ, Basis.DEFAULT)
            else:
                equal = stats.equal(literal)  # type: ignore[union-attr]
            if node.op == "==":
                return equal
            return Estimate(_clip(1.0 - equal.selectivity), equal.basis)
        if not known or stats.redacted:  # type: ignore[union-attr]
            return Estimate(DEFAULT_INEQ, Basis.DEFAULT)
        assert stats is not None
        non_null = 1.0 - stats.null_share
        if node.op in ("<", "<="):
            return stats.below(literal, node.op == "<=")
        below = stats.below(literal, node.op == ">")
        return Estimate(_clip(non_null - below.selectivity), below.basis)

    def _member(self, node: Member, stats: ColumnStats | None) -> Estimate:
        if stats is None or isinstance(node.values, Named) or not all(isinstance(v, Literal) for v in node.values):
            share = Estimate(min(DEFAULT_EQ * (1 if isinstance(node.values, Named) else len(node.values)), 1.0), Basis.DEFAULT)
        else:
            values = {stats.lookup(v.value) for v in node.values if isinstance(v, Literal) and v.value is not None}
            parts = [stats.equal(v) for v in values]
            total = sum(p.selectivity for p in parts)
            share = Estimate(_clip(min(total, 1.0 - stats.null_share)), _weakest(Basis.EXACT, *(p.basis for p in parts)))
        if node.negated:
            return Estimate(_clip(1.0 - share.selectivity), share.basis)
        return share

    def _range(self, node: Range, stats: ColumnStats | None) -> Estimate:
        low = node.low.value if isinstance(node.low, Literal) else None
        high = node.high.value if isinstance(node.high, Literal) else None
        if stats is None or low is None or high is None or stats.redacted:
            return Estimate(DEFAULT_EQ, Basis.DEFAULT)
        include_low = node.inclusive in ("both", "left")
        include_high = node.inclusive in ("both", "right")
        upper = stats.below(high, include_high)
        lower = stats.below(low, not include_low)
        return Estimate(_clip(upper.selectivity - lower.selectivity), _weakest(upper.basis, lower.basis))

    def _string(self, node: StrTest, stats: ColumnStats | None) -> Estimate:
        if stats is None or stats.redacted or not isinstance(node.pattern, Literal) or not isinstance(node.pattern.value, str):
            return Estimate(DEFAULT_MATCH, Basis.DEFAULT)
        test = _string_test(node)
        if test is None:
            return Estimate(DEFAULT_MATCH, Basis.DEFAULT)
        listed = sum(share for value, share in stats.mcv.items() if isinstance(value, str) and test(value))
        rest = _clip(1.0 - sum(stats.mcv.values()) - stats.null_share)
        if stats.complete and not stats.suppressed_values:
            return Estimate(_clip(listed), Basis.EXACT)
        return Estimate(_clip(listed + rest * DEFAULT_MATCH), Basis.MOST_COMMON)


def reads_as_number(value: Any) -> bool:
    """Whether `pd.to_numeric(..., errors="coerce")` gives a value present for this listed value."""
    if isinstance(value, str):
        return _NUMBER_TEXT.fullmatch(value) is not None
    return isinstance(value, (bool, int)) or (isinstance(value, float) and not math.isnan(value))


def _string_test(node: StrTest):  # type: ignore[no-untyped-def]
    """A Python predicate with the pandas method's meaning, for the listed values."""
    pattern = node.pattern.value  # type: ignore[attr-defined]
    options = {key: value.value for key, value in node.options if isinstance(value, Literal)}
    if node.method == "startswith":
        return lambda v: v.startswith(pattern)
    if node.method == "endswith":
        return lambda v: v.endswith(pattern)
    flags = int(options.get("flags", 0) or 0)
    if options.get("case") is False:
        flags |= re.IGNORECASE
    if node.method == "contains" and options.get("regex") is False:
        if flags & re.IGNORECASE:
            return lambda v: pattern.lower() in v.lower()
        return lambda v: pattern in v
    try:
        compiled = re.compile(pattern, flags)
    except re.error:
        return None
    method = {"contains": compiled.search, "match": compiled.match, "fullmatch": compiled.fullmatch}[node.method]
    return lambda v: method(v) is not None


_ESTIMATE: Cases[Callable[[Estimator, Any], Estimate]] = Cases("selectivity", {
    Not: Estimator._not,
    And: Estimator._and,
    Or: Estimator._or,
    NullTest: Estimator._null_test,
    NumericTest: Estimator._numeric_test,
    Compare: lambda estimator, node: estimator._compare(node, estimator._stats(node)),
    Member: lambda estimator, node: estimator._member(node, estimator._stats(node)),
    Range: lambda estimator, node: estimator._range(node, estimator._stats(node)),
    StrTest: lambda estimator, node: estimator._string(node, estimator._stats(node)),
    RowNulls: Estimator._row_nulls,
    (Column, Literal, Named, Arith, Opaque): Estimator._not_a_test,
})
