"""Predicate IR: canonical text reads back to the same IR, and nodes list their columns."""

from __future__ import annotations

from dataclasses import dataclass

import pytest
from hypothesis import given, settings
from strategies import ir_trees

from chainlint.ir import (
    NODE_TYPES,
    Cases,
    Column,
    Compare,
    Literal,
    Member,
    Node,
    Not,
    Opaque,
    PredicateSyntaxError,
    Range,
    StrTest,
    UnhandledNode,
    parse_predicate,
)


@settings(max_examples=400, deadline=None)
@given(ir_trees())
def test_canonical_text_round_trips(node) -> None:
    text = node.canonical()
    assert parse_predicate(text) == node
    assert parse_predicate(text).canonical() == text


@pytest.mark.parametrize(
    ("node", "text"),
    [
        (Compare("==", Column("hub"), Literal("WEST")), "hub == 'WEST'"),
        (Member(Column("kind"), (Literal("p"), Literal("r"))), "kind in ('p', 'r')"),
        (Range(Column("weight"), Literal(3), Literal(9)), "weight between 3 and 9"),
        (Not(StrTest(Column("kind"), "startswith", Literal("z"))), "not kind.str.startswith('z')"),
        (Compare(">", Column("two words"), Literal(1.5)), "`two words` > 1.5"),
        (Compare("==", Column("null"), Literal(None)), "`null` == None"),
    ],
)
def test_canonical_examples(node, text: str) -> None:
    assert node.canonical() == text
    assert parse_predicate(text) == node


def test_literals_keep_their_type() -> None:
    assert Literal(1) != Literal(True)
    assert Literal(1) != Literal(1.0)
    assert parse_predicate("a == 1") != parse_predicate("a == 1.0")


def test_columns_are_listed() -> None:
    node = parse_predicate("a > 1 and (b is null or `c d`.str.contains('x')) and e between f and 3")
    assert node.columns() == {"a", "b", "c d", "e", "f"}


@pytest.mark.parametrize("text", ["a >", "a between 1", "a is nothing", "a.str.lower()", "(a == 1", "a == 1 )", "a in 3"])
def test_bad_text_is_rejected(text: str) -> None:
    with pytest.raises(PredicateSyntaxError):
        parse_predicate(text)


def test_a_function_over_the_ir_names_every_node_class() -> None:
    """A missing case fails where the table is built, a node of a new class where it is met:
    never a silent default."""
    with pytest.raises(UnhandledNode, match="no case for .*Opaque"):
        Cases("sample", {cls: str for cls in NODE_TYPES if cls is not Opaque})
    partial = Cases("columns only", {Column: lambda node: node.name}, over=(Column,))
    assert partial[Column("a")](Column("a")) == "a"
    with pytest.raises(UnhandledNode, match="columns only: no case for Literal"):
        partial[Literal(1)]

    @dataclass(frozen=True, slots=True)
    class Unknown(Node):
        name: str

    with pytest.raises(UnhandledNode, match="canonical text: no case for Unknown"):
        Unknown("x").canonical()
    with pytest.raises(UnhandledNode, match="children: no case for Unknown"):
        Unknown("x").columns()
