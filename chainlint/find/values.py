"""Settle the free names of a converted predicate: a known value, a proven single value, or a
reason to keep the step in place.

A name compared with a column is safe to move only if it is one value. A Series would be
realigned by index against fewer rows ("Can only compare identically-labeled Series"), an
array must match the number of rows, a list is compared position by position. Membership
(`isin`, `in @names`) reads values, not positions, so any collection is fine there. In a
statement run, a name the run itself assigns (`@df` while `df = df...`) changes meaning with
the position of the step, so that step stays where it is written.
"""

from __future__ import annotations

import ast
from collections.abc import Callable
from typing import Any

from chainlint.find.bindings import SCALAR, VALUE, VALUES, Resolved, fold
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
from chainlint.model import Barrier, BarrierKind

Resolver = Callable[[str], Resolved]
_OPS = {"+": ast.Add(), "-": ast.Sub(), "*": ast.Mult(), "/": ast.Div(), "//": ast.FloorDiv(), "%": ast.Mod(), "**": ast.Pow()}


class _Settler:
    def __init__(self, resolve: Resolver, assigned: frozenset[str]) -> None:
        self.resolve = resolve
        self.assigned = assigned
        self.barriers: list[Barrier] = []

    def assigned_here(self, named: Named) -> bool:
        head = named.name.split(".")[0]
        if head in self.assigned:
            reason = f"reads `{head}`, which this run assigns: its value depends on where the step runs"
            self.barriers.append(Barrier(BarrierKind.FRAME, reason))
            return True
        return False

    def single(self, node: Node) -> Node:
        """A value that must be one value: resolved, kept as a proven name, or a barrier."""
        return _VALUE[node](self, node)

    def named(self, node: Named) -> Node:
        if self.assigned_here(node):
            return node
        found = self.resolve(node.name)
        if found.kind == VALUE:
            return Literal(found.value)  # type: ignore[arg-type]
        if found.kind == SCALAR:
            return node
        if found.kind == VALUES:
            reason = f"`{node.name}` holds several values, which pandas compares position by position"
        else:
            reason = f"`{node.name}` may be a Series or an array ({found.reason}); moved, it would meet other rows"
        self.barriers.append(Barrier(BarrierKind.FOREIGN, reason))
        return node

    def arith(self, node: Arith) -> Node:
        left, right = self.single(node.left), self.single(node.right)
        if isinstance(left, Literal) and isinstance(right, Literal):
            folded = fold(_OPS[node.op], left.value, right.value)
            if folded is not None:
                return Literal(folded)  # type: ignore[arg-type]
        return Arith(node.op, left, right)

    def values(self, values: tuple[Node, ...] | Named) -> tuple[Node, ...] | Named:
        if not isinstance(values, Named):
            return tuple(self.single(v) for v in values)
        if self.assigned_here(values):
            return values
        found = self.resolve(values.name)
        if found.kind == VALUES and found.value:
            return tuple(Literal(v) for v in found.value)  # type: ignore[union-attr]
        return values

    def mask(self, node: Node) -> Node:
        return _MASK[node](self, node)

    def str_test(self, node: StrTest) -> Node:
        options = tuple((key, self.single(value)) for key, value in node.options)
        return StrTest(self.single(node.operand), node.method, self.single(node.pattern), options)


def _unchanged(settler: _Settler, node: Node) -> Node:
    return node


#: A node where one value is expected (an operand): names resolved, arithmetic folded.
_VALUE: Cases[Callable[[_Settler, Any], Node]] = Cases("settle a value", {
    Named: _Settler.named,
    Arith: _Settler.arith,
    (Column, Literal, Opaque, Compare, Member, Range, NullTest, NumericTest, StrTest, RowNulls, Not, And, Or): _Settler.mask,
})

#: A node where a mask is expected: its operands settled, its parts in turn.
_MASK: Cases[Callable[[_Settler, Any], Node]] = Cases("settle a mask", {
    Compare: lambda settler, node: Compare(node.op, settler.single(node.left), settler.single(node.right)),
    Member: lambda settler, node: Member(settler.single(node.operand), settler.values(node.values), node.negated),
    Range: lambda settler, node: Range(settler.single(node.operand), settler.single(node.low), settler.single(node.high), node.inclusive),
    NullTest: lambda settler, node: NullTest(settler.single(node.operand), node.negated),
    NumericTest: lambda settler, node: NumericTest(settler.single(node.operand), node.negated),
    StrTest: _Settler.str_test,
    Not: lambda settler, node: Not(settler.mask(node.operand)),
    (And, Or): lambda settler, node: type(node)(tuple(settler.mask(p) for p in node.parts)),
    (Column, Literal, Named, Arith, Opaque, RowNulls): _unchanged,
})


def settle(node: Node, resolve: Resolver, assigned: frozenset[str]) -> tuple[Node, list[Barrier]]:
    """The predicate with its known values filled in, and the barriers its names raise."""
    settler = _Settler(resolve, assigned)
    return settler.mask(node), settler.barriers
