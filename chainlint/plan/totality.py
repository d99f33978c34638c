"""How far a step may move: a judgement of its predicate IR against the profile's dtypes.

Moving a step earlier than written shows it rows that an earlier step used to remove; moving it
later shows it fewer rows. A step is *total* when its predicate cannot raise on any rows of
its columns' dtypes and its per-row answer does not depend on which or how many rows it sees;
only a total step may move earlier. A step that may raise on some values (a division on
Decimal objects, `.str` of missing values, a comparison with a value of unknown type) but
answers row by row may still move later: on fewer rows it raises no more. A step whose answer
depends on the rows it sees (pandas hands arithmetic on float32 and powers to numexpr from a
million elements and to numpy below; `.str` of an object column refuses a column once only
non-strings remain), or that reads a column the profile does not hold as a plain column
(MultiIndex columns, a column the code adds), stays where it is written.

Unknown means not total: every dtype or form not listed here is judged by its worst case.
"""

from __future__ import annotations

import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from functools import lru_cache
from typing import Any

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

ANY, LATER, STAYS = "any", "later", "stays"
_RANK = {ANY: 0, LATER: 1, STAYS: 2}

#: Reason prefixes, as `explain` prints them.
MAY_RAISE = "may raise on rows an earlier step removes"
ROWS_SEEN = "its answer depends on the rows it sees"


@dataclass(frozen=True)
class Limit:
    """`moves`: `any` (earlier or later), `later` (only later than written) or `stays`;
    `reason` says why it is not `any`."""

    moves: str
    reason: str | None = None


TOTAL = Limit(ANY)

_NUMBER = "number"      # int8..int64, uint8..uint64, float64 (numpy), Int64/Float64 (nullable)
_WIDE = "wide"          # int64 and float64: arithmetic that pandas computes the same at any size
_BOOL = "bool"
_STR = "str"
_CATEGORY = "category"
_TIME = "time"          # datetime64 with one unit and zone for the whole column
_OBJECT = "object"
_SIZED = "sized"        # float32/float16: numexpr and numpy disagree by size
_OTHER = "other"

_REGEX_UNSAFE = re.compile(r"\(\?|\\[1-9]|\\[pPgk]")


def column_kind(dtype: str | None) -> str | None:
    """The kind of a profile's or pandas' dtype name; None for a column the profile lacks."""
    if dtype is None:
        return None
    if dtype in ("int64", "float64"):
        return _WIDE
    if re.fullmatch(r"u?int(8|16|32)|uint64|Int(8|16|32|64)|UInt(8|16|32|64)|Float(32|64)", dtype):
        return _NUMBER
    if dtype in ("float32", "float16"):
        return _SIZED
    if dtype == "bool":
        return _BOOL
    if dtype in ("str", "string"):
        return _STR
    if dtype == "category":
        return _CATEGORY
    if re.fullmatch(r"datetime64\[(s|ms|us|ns)(, [^\]]+)?\]", dtype):
        return _TIME
    if dtype == "object":
        return _OBJECT
    return _OTHER


def judge(predicate: Node, dtypes: Mapping[str, str], profile: str = "the profile", unknown: str | None = None) -> Limit:
    """How far a step with this predicate may move, for columns of these dtypes; `unknown` says
    why a column has none where that is not the profile's doing."""
    return _Judge(dtypes, profile, unknown).limit(predicate)


class _Judge:
    def __init__(self, dtypes: Mapping[str, str], profile: str, unknown: str | None = None) -> None:
        self.dtypes = dtypes
        self.profile = profile
        self.unknown = unknown
        self.worst = TOTAL

    def limit(self, predicate: Node) -> Limit:
        self.mask(predicate)
        return self.worst

    def note(self, moves: str, reason: str, prefixed: bool = True) -> None:
        """Keep the worst limit met so far (the first reason of that rank)."""
        if _RANK[moves] > _RANK[self.worst.moves]:
            prefix = MAY_RAISE if moves == LATER else ROWS_SEEN
            self.worst = Limit(moves, f"{prefix}: {reason}" if prefixed else reason)

    # -- masks -----------------------------------------------------------------------------
    def mask(self, node: Node) -> None:
        _MASK[node](self, node)

    def parts(self, node: And | Or) -> None:
        for part in node.parts:
            self.mask(part)

    def range(self, node: Range) -> None:
        self.compare(">=", node.operand, node.low)
        self.compare("<=", node.operand, node.high)

    def column_mask(self, node: Column) -> None:
        if self.value(node) != _BOOL:
            self.note(LATER, f"`{node.name}` as a mask must hold booleans only")

    def not_modelled(self, node: Node) -> str:
        self.note(STAYS, f"`{node.canonical()}` is not modelled")
        return _OTHER

    # -- values ----------------------------------------------------------------------------
    def value(self, node: Node) -> str:
        """The kind of an operand (a column, a literal, a name or arithmetic)."""
        return _VALUE[node](self, node)

    def column(self, node: Column) -> str:
        kind = column_kind(self.dtypes.get(node.name))
        if kind is None:
            self.note(STAYS, self.unknown or f"reads `{node.name}`, which profile `{self.profile}` does not hold as a plain column",
                      prefixed=False)
            return _OTHER
        if kind == _SIZED:
            self.note(STAYS, f"`{node.name}` is {self.dtypes[node.name]}, which pandas computes with numexpr on large frames and numpy on small ones")
        return kind

    def arith(self, node: Arith) -> str:
        left, right = self.value(node.left), self.value(node.right)
        text = node.canonical()
        if node.op == "**":
            self.note(STAYS, f"`{text}` raises to a power, which pandas computes with numexpr on large frames (integer negative powers raise only in numpy)")
            return _NUMBER
        if _OBJECT in (left, right):
            self.note(LATER, f"`{text}` computes with object values (Decimal or mixed types may raise, e.g. on division by zero)")
            return _OBJECT
        if node.op in ("//", "%") and self._integers(node.left) and self._integers(node.right) and node.right.columns():
            self.note(STAYS, f"`{text}` divides integers, which pandas gives as floats for every row once a divisor it sees is zero (rounding integers beyond 2**53)")
            return _NUMBER
        if all(k in (_WIDE, "literal number") for k in (left, right)):
            return _WIDE
        if _BOOL in (left, right) or _SIZED in (left, right) or (_NUMBER in (left, right) and all(
                k in (_WIDE, _NUMBER, "literal number") for k in (left, right))):
            self.note(STAYS, f"`{text}` computes on {self._names(node)} whose result type pandas may choose by size (numexpr from a million elements)")
            return _NUMBER
        self.note(LATER, f"`{text}` may overflow or meet values it cannot compute with")
        return _OTHER

    def _integers(self, node: Node) -> bool:
        """Whether every column `node` reads has an integer dtype (as far as the profile says)."""
        return all(re.fullmatch(r"u?int\d+|U?Int\d+", self.dtypes.get(c) or "") for c in node.columns())

    def _names(self, node: Node) -> str:
        return ", ".join(f"`{c}` ({self.dtypes.get(c, 'unknown')})" for c in sorted(node.columns())) or "literals"

    # -- leaves ----------------------------------------------------------------------------
    def compare(self, op: str, left_node: Node, right_node: Node) -> None:
        left, right = self.value(left_node), self.value(right_node)
        text = f"{left_node.canonical()} {op} {right_node.canonical()}"
        kinds = {left, right}
        if _OBJECT in kinds:
            self.note(LATER, f"`{text}` compares values of an object column, which may be of mixed types")
            return
        if "named" in kinds:
            self.note(LATER, f"`{text}` compares with a value whose type chainlint cannot see")
            return
        numeric = (_WIDE, _NUMBER, "literal number", "literal bool")
        if kinds <= set(numeric):
            return
        if kinds <= {_BOOL, "literal bool"} or kinds == {_BOOL, _WIDE} or kinds == {_BOOL, _NUMBER}:
            return
        if kinds <= {_STR, "literal str"} and kinds != {"literal str"}:
            return
        if _CATEGORY in kinds and kinds <= {_CATEGORY, "literal str", "literal number"} and len(kinds) == 2:
            if op in ("==", "!="):
                return
            self.note(LATER, f"`{text}` orders a categorical column (unordered categoricals raise)")
            return
        if kinds <= {_TIME, "literal str"} and _TIME in kinds:
            if kinds == {_TIME} and self._same_dtype(left_node, right_node):
                return
            if kinds == {_TIME, "literal str"}:
                return
        self.note(LATER, f"`{text}` compares values of different kinds")

    def _same_dtype(self, left: Node, right: Node) -> bool:
        return isinstance(left, Column) and isinstance(right, Column) and self.dtypes[left.name] == self.dtypes[right.name]

    def member(self, node: Member) -> None:
        kind = self.value(node.operand)
        text = node.canonical()
        if kind == _OBJECT:
            self.note(LATER, f"`{text}` tests membership of object values, which may be unhashable")
            return
        if isinstance(node.values, Named):
            if kind not in (_STR, _CATEGORY):
                self.note(LATER, f"`{text}` tests membership in a value whose type chainlint cannot see")
            return
        values = {self.value(v) for v in node.values}
        if kind in (_WIDE, _NUMBER) and values <= {"literal number", "literal bool"}:
            return
        if kind in (_STR, _CATEGORY) and values <= {"literal str"}:
            return
        if kind == _BOOL and values <= {"literal bool"}:
            return
        self.note(LATER, f"`{text}` tests membership in values of another kind")

    def numeric_test(self, node: NumericTest) -> None:
        """`to_numeric(..., errors="coerce")` never raises on numbers, booleans, text,
        categoricals or datetimes and reads each value alone (pandas 3.1, checked in the
        tests); on object values it raises for some (a 0-d numpy array) and reads a value by
        the others (a complex number among them changes how lists read); other dtypes (Arrow
        decimals with missing values raise) are not vouched for."""
        kind = self.value(node.operand)
        text = node.canonical()
        if kind == _OBJECT:
            self.note(STAYS, f"`{text}` parses object values: pandas reads each by the others, and refuses some")
        elif kind not in (_WIDE, _NUMBER, _BOOL, _STR, _CATEGORY, _TIME, _SIZED):
            self.note(STAYS, f"`{text}` parses values of a type chainlint has not checked `to_numeric` on", prefixed=False)

    def string_test(self, node: StrTest) -> None:
        kind = self.value(node.operand)
        text = node.canonical()
        if kind == _OBJECT:
            self.note(STAYS, f"`{text}`: `.str` of an object column raises once only non-strings remain, and its missing values cannot mask")
            return
        if kind != _STR:
            self.note(LATER, f"`{text}`: `.str` of a {kind} column gives missing values, which cannot mask")
            return
        options = dict(node.options)
        if not isinstance(node.pattern, Literal) or not isinstance(node.pattern.value, str):
            self.note(LATER, f"`{text}` has a pattern chainlint cannot see")
            return
        if any(key not in ("case", "regex", "na") or not isinstance(value, Literal) or not isinstance(value.value, bool)
               for key, value in options.items()):
            self.note(LATER, f"`{text}` has options chainlint does not model")
            return
        regex = node.method != "contains" or options.get("regex", Literal(True)) == Literal(True)
        if node.method in ("startswith", "endswith") or not regex:
            return
        try:
            re.compile(node.pattern.value)
        except re.error:
            self.note(LATER, f"`{text}` is not a valid regular expression")
            return
        if not _arrow_compiles(node.pattern.value):
            self.note(LATER, f"`{text}` is a regular expression pyarrow's engine refuses (on any row, not on none)")
            return
        if _REGEX_UNSAFE.search(node.pattern.value):
            self.note(LATER, f"`{text}` uses regular-expression syntax that pyarrow's engine may refuse")


@lru_cache(maxsize=256)
def _arrow_compiles(pattern: str) -> bool:
    """Whether pyarrow's regular-expression engine (RE2), which pandas asks for `str` columns,
    takes the pattern: it refuses some Python reads (repetitions over 1,000, possessive
    quantifiers), and pandas asks it only when the column holds a row."""
    import pyarrow as pa
    import pyarrow.compute as pc

    try:
        pc.match_substring_regex(pa.array([""], pa.string()), pattern)
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        return False
    return True


def _literal_kind(node: Literal) -> str:
    value = node.value
    if isinstance(value, bool):
        return "literal bool"
    if isinstance(value, (int, float)):
        return "literal number"
    if isinstance(value, str):
        return "literal str"
    return "literal none"


_MASK: Cases[Callable[[_Judge, Any], object]] = Cases("totality of a mask", {
    (And, Or): _Judge.parts,
    Not: lambda judge, node: judge.mask(node.operand),
    Compare: lambda judge, node: judge.compare(node.op, node.left, node.right),
    Range: _Judge.range,
    Member: _Judge.member,
    NullTest: lambda judge, node: judge.value(node.operand),  # isna never raises; only the operand's own arithmetic may
    NumericTest: _Judge.numeric_test,
    StrTest: _Judge.string_test,
    Column: _Judge.column_mask,
    (Literal, Named, Arith, Opaque, RowNulls): _Judge.not_modelled,
})

_VALUE: Cases[Callable[[_Judge, Any], str]] = Cases("kind of an operand", {
    Column: _Judge.column,
    Literal: lambda judge, node: _literal_kind(node),
    Named: lambda judge, node: "named",
    Arith: _Judge.arith,
    (Opaque, Compare, Member, Range, NullTest, NumericTest, StrTest, RowNulls, Not, And, Or): _Judge.not_modelled,
})
