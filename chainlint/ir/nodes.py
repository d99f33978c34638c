"""The predicate IR: small immutable nodes that print canonically.

The canonical text is the key under which statistics are stored and looked up, so every node
prints one way only and `chainlint.ir.text.parse_predicate` reads that text back to an equal node.
Constructors do no normalisation; the finder builds nodes in normal form (column on the left of
a comparison, `and`/`or` flattened) and the canonical parser keeps that form.
"""

from __future__ import annotations

import keyword
import math
from collections.abc import Callable, Iterator, Mapping
from dataclasses import dataclass
from typing import Any, Generic, TypeVar, Union

LiteralValue = Union[str, int, float, bool, None]

#: Words of the canonical grammar that a column name must not print as bare.
RESERVED = frozenset({"between", "inclusive", "null", "opaque", "is", "in", "not", "and", "or"})

COMPARE_OPS = ("==", "!=", "<", "<=", ">", ">=")
MIRRORED = {"==": "==", "!=": "!=", "<": ">", "<=": ">=", ">": "<", ">=": "<="}
ARITH_OPS = ("+", "-", "*", "/", "//", "%", "**")
INCLUSIVE = ("both", "neither", "left", "right")
STRING_METHODS = ("startswith", "endswith", "contains", "match", "fullmatch")


class Node:
    """Base of every IR node."""

    __slots__ = ()

    def columns(self) -> frozenset[str]:
        """The column names this node reads."""
        return frozenset(node.name for node in self.walk() if isinstance(node, Column))

    def walk(self) -> Iterator[Node]:
        """This node and every node below it (depth first, no order promised)."""
        stack: list[Node] = [self]
        while stack:
            node = stack.pop()
            yield node
            stack.extend(node.children())

    def children(self) -> tuple[Node, ...]:
        """The nodes directly below this one (values, operands, parts, options)."""
        return _CHILDREN[self](self)

    def canonical(self) -> str:
        return _print(self)

    def __str__(self) -> str:
        return _print(self)


@dataclass(frozen=True, slots=True)
class Column(Node):
    name: str


@dataclass(frozen=True, slots=True)
class Literal(Node):
    value: LiteralValue

    def __eq__(self, other: object) -> bool:
        # 1 == True == 1.0 in Python; the IR keeps the literal's type apart.
        if not isinstance(other, Literal):
            return NotImplemented
        return type(self.value) is type(other.value) and _same_value(self.value, other.value)

    def __hash__(self) -> int:
        # Equal literals hash alike: every NaN is the same literal, and `hash(nan)` differs per object.
        value = self.value
        return hash((type(value).__name__, "nan" if isinstance(value, float) and math.isnan(value) else value))


@dataclass(frozen=True, slots=True)
class Named(Node):
    """A value chainlint cannot resolve statically: a name, a dotted constant, or `@x`."""

    name: str


@dataclass(frozen=True, slots=True)
class Arith(Node):
    op: str
    left: Node
    right: Node


@dataclass(frozen=True, slots=True)
class Compare(Node):
    op: str
    left: Node
    right: Node


@dataclass(frozen=True, slots=True)
class Member(Node):
    """`isin`, `in` and `not in`; `values` is a tuple of literals or one named value."""

    operand: Node
    values: tuple[Node, ...] | Named
    negated: bool = False


@dataclass(frozen=True, slots=True)
class Range(Node):
    """`Series.between(low, high, inclusive=...)`."""

    operand: Node
    low: Node
    high: Node
    inclusive: str = "both"


@dataclass(frozen=True, slots=True)
class NullTest(Node):
    """`isna()` / `isnull()`; negated for `notna()` / `notnull()` and `dropna(subset=...)`."""

    operand: Node
    negated: bool = False


@dataclass(frozen=True, slots=True)
class NumericTest(Node):
    """`pd.to_numeric(operand, errors="coerce").notna()`: the value reads as a number
    (pandas' own parsing, unparsable values coerced to missing); negated for `.isna()`."""

    operand: Node
    negated: bool = False


@dataclass(frozen=True, slots=True)
class StrTest(Node):
    """A `.str` predicate; `options` holds the keyword arguments given, sorted by name."""

    operand: Node
    method: str
    pattern: Node
    options: tuple[tuple[str, Node], ...] = ()


@dataclass(frozen=True, slots=True)
class RowNulls(Node):
    """`dropna()` without `subset`: a row is kept by its missing values over every column
    (`how="any"`: none missing; `"all"`: not all missing; `thresh`: at least that many present)."""

    how: str = "any"
    thresh: int | None = None


@dataclass(frozen=True, slots=True)
class Not(Node):
    operand: Node


@dataclass(frozen=True, slots=True)
class And(Node):
    parts: tuple[Node, ...]


@dataclass(frozen=True, slots=True)
class Or(Node):
    parts: tuple[Node, ...]


@dataclass(frozen=True, slots=True)
class Opaque(Node):
    """A part chainlint does not model; it keeps its source text."""

    text: str


#: Node types whose value is a boolean mask (what a row filter needs at its top).
PREDICATE_TYPES = (Compare, Member, Range, NullTest, NumericTest, StrTest, RowNulls, Not, And, Or)


def _same_value(a: LiteralValue, b: LiteralValue) -> bool:
    if isinstance(a, float) and isinstance(b, float) and math.isnan(a) and math.isnan(b):
        return True
    return a == b


def is_plain_name(name: str) -> bool:
    """Whether a column name prints bare (else it is quoted in backticks)."""
    return name.isidentifier() and not keyword.iskeyword(name) and name not in RESERVED


def format_column(name: str) -> str:
    if is_plain_name(name):
        return name
    return "`" + name.replace("`", "``") + "`"


def format_literal(value: LiteralValue) -> str:
    if isinstance(value, float):
        if math.isinf(value):
            return "1e999" if value > 0 else "-1e999"
        if math.isnan(value):
            return "nan"
        return repr(value)
    return repr(value)


def _operand(node: Node) -> str:
    """Print an operand of a comparison or arithmetic, parenthesising nested arithmetic."""
    text = _print(node)
    return f"({text})" if isinstance(node, Arith) else text


def _bool_part(node: Node, parent: type) -> str:
    text = _print(node)
    if isinstance(node, (And, Or)) and not isinstance(node, parent):
        return f"({text})"
    return text


def _member(node: Member) -> str:
    word = "not in" if node.negated else "in"
    if isinstance(node.values, Named):
        values = _print(node.values)
    elif len(node.values) == 1:
        values = f"({_print(node.values[0])},)"
    else:
        values = "(" + ", ".join(_print(v) for v in node.values) + ")"
    return f"{_operand(node.operand)} {word} {values}"


def _range(node: Range) -> str:
    text = f"{_operand(node.operand)} between {_operand(node.low)} and {_operand(node.high)}"
    if node.inclusive != "both":
        text += f" inclusive {node.inclusive!r}"
    return text


def _str_test(node: StrTest) -> str:
    args = [_print(node.pattern)] + [f"{key}={_print(value)}" for key, value in node.options]
    return f"{_operand(node.operand)}.str.{node.method}({', '.join(args)})"


def _row_nulls(node: RowNulls) -> str:
    if node.thresh is not None:
        return f"notnull(*, thresh={node.thresh})"
    return "notnull(*)" if node.how == "any" else "notnull(*, how='all')"


def _not(node: Not) -> str:
    inner = _print(node.operand)
    return f"not ({inner})" if isinstance(node.operand, (And, Or)) else f"not {inner}"


def _print(node: Node) -> str:
    return _PRINT[node](node)


#: Every node class; a `Cases` table must name each of them (or say which it is limited to).
NODE_TYPES: tuple[type[Node], ...] = (Column, Literal, Named, Arith, Compare, Member, Range, NullTest, NumericTest, StrTest,
                                      RowNulls, Not, And, Or, Opaque)

F = TypeVar("F", bound=Callable[..., Any])


class UnhandledNode(TypeError):
    """A node class a function over the IR has no case for: a new node type was added without
    saying what each function does with it."""


class Cases(Generic[F]):
    """One function over IR nodes written as a case per node class: `cases[node]` is the case
    for the node's class. The table must name every class of `NODE_TYPES` (or of `over`, for a
    function defined on part of the IR): a missing case fails where the table is built, never
    with a silent default; a node of another class fails where it is looked up."""

    def __init__(self, name: str, table: Mapping[type[Node] | tuple[type[Node], ...], F],
                 over: tuple[type[Node], ...] = NODE_TYPES) -> None:
        self.name = name
        self.table: dict[type[Node], F] = {}
        for key, case in table.items():
            for cls in key if isinstance(key, tuple) else (key,):
                self.table[cls] = case
        missing = [cls.__name__ for cls in over if cls not in self.table]
        if missing:
            raise UnhandledNode(f"{name}: no case for {', '.join(missing)}")

    def __getitem__(self, node: Node) -> F:
        try:
            return self.table[type(node)]
        except KeyError:
            raise UnhandledNode(f"{self.name}: no case for {type(node).__name__}") from None


def _no_children(node: Node) -> tuple[Node, ...]:
    return ()


def _member_children(node: Member) -> tuple[Node, ...]:
    return (node.operand, *node.values) if isinstance(node.values, tuple) else (node.operand, node.values)


_CHILDREN: Cases[Callable[[Any], tuple[Node, ...]]] = Cases("children", {
    (Column, Literal, Named, Opaque, RowNulls): _no_children,
    (Arith, Compare): lambda node: (node.left, node.right),
    Member: _member_children,
    Range: lambda node: (node.operand, node.low, node.high),
    (NullTest, NumericTest, Not): lambda node: (node.operand,),
    StrTest: lambda node: (node.operand, node.pattern, *(value for _, value in node.options)),
    (And, Or): lambda node: node.parts,
})

_PRINT: Cases[Callable[[Any], str]] = Cases("canonical text", {
    Column: lambda node: format_column(node.name),
    Literal: lambda node: format_literal(node.value),
    Named: lambda node: "@" + node.name,
    Opaque: lambda node: f"opaque({node.text!r})",
    (Arith, Compare): lambda node: f"{_operand(node.left)} {node.op} {_operand(node.right)}",
    Member: _member,
    Range: _range,
    NullTest: lambda node: f"{_operand(node.operand)} is {'not ' if node.negated else ''}null",
    NumericTest: lambda node: f"{_operand(node.operand)} is {'not ' if node.negated else ''}numeric",
    StrTest: _str_test,
    RowNulls: _row_nulls,
    Not: _not,
    And: lambda node: " and ".join(_bool_part(part, And) for part in node.parts),
    Or: lambda node: " or ".join(_bool_part(part, Or) for part in node.parts),
})
