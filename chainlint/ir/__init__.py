"""Predicate intermediate representation: nodes, normal-form builders, canonical text."""

from chainlint.ir.build import make_and, make_compare, make_or
from chainlint.ir.nodes import (
    PREDICATE_TYPES,
    And,
    Arith,
    Column,
    Compare,
    Literal,
    Member,
    Named,
    Node,
    Not,
    NullTest,
    Opaque,
    Or,
    Range,
    RowNulls,
    StrTest,
)
from chainlint.ir.text import PredicateSyntaxError, parse_predicate

__all__ = [
    "PREDICATE_TYPES",
    "And",
    "Arith",
    "Column",
    "Compare",
    "Literal",
    "Member",
    "Named",
    "Node",
    "Not",
    "NullTest",
    "Opaque",
    "Or",
    "PredicateSyntaxError",
    "Range",
    "RowNulls",
    "StrTest",
    "make_and",
    "make_compare",
    "make_or",
    "parse_predicate",
]
