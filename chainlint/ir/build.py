"""Constructors that keep IR in normal form (flattened `and`/`or`, column on the left)."""

from __future__ import annotations

from collections.abc import Iterable

from chainlint.ir.nodes import MIRRORED, And, Column, Compare, Node, Or


def make_and(parts: Iterable[Node]) -> Node:
    """`and` of the parts, nested `and`s flattened; a single part is returned as it is."""
    flat: list[Node] = []
    for part in parts:
        flat.extend(part.parts if isinstance(part, And) else (part,))
    return flat[0] if len(flat) == 1 else And(tuple(flat))


def make_or(parts: Iterable[Node]) -> Node:
    """`or` of the parts, nested `or`s flattened; a single part is returned as it is."""
    flat: list[Node] = []
    for part in parts:
        flat.extend(part.parts if isinstance(part, Or) else (part,))
    return flat[0] if len(flat) == 1 else Or(tuple(flat))


def make_compare(op: str, left: Node, right: Node) -> Compare:
    """A comparison with the column on the left when only the right side is a column."""
    if isinstance(right, Column) and not isinstance(left, Column):
        return Compare(MIRRORED[op], right, left)
    return Compare(op, left, right)
