"""A fused mask written in the code is a chain too: `df[(a) & (b) & (c)]`, `.loc[m1 & m2]`,
`.loc[lambda d: (a) & (b)]`, `.query("a and b")` (or `&` in the text).

Its conjuncts become the chain's steps, each converted and classified as a step of its own and
carrying `Step.conjunct`, the span of its text inside the mask (without the parentheses around
it), so that a rewrite can split or join them. A mask is split only when every conjunct is a
row-wise predicate chainlint understands with no barrier: a part that reads the frame it
receives (a mean, a rank), a value it cannot prove single, another frame's mask realigned by
index, or anything not understood would see other rows once split, so such a mask stays one
step (and, alone, no chain).
"""

from __future__ import annotations

import ast
from collections.abc import Iterator
from dataclasses import replace

from chainlint.model import Span, StepKind
from chainlint.find.positions import Positions
from chainlint.find.query import query_conjuncts
from chainlint.find.shapes import Shape


def conjunct_shapes(shape: Shape, positions: Positions) -> list[tuple[Shape, Span]] | None:
    """Each conjunct of a fused mask as a step shape of its own, with its span; None when the
    step is not a written conjunction of two or more parts."""
    if shape.flag or shape.written is not None or shape.arg is None or shape.kind is StepKind.DROPNA:
        return None
    arg = shape.arg
    if shape.kind is StepKind.QUERY:
        return _query_parts(shape, arg, positions)
    if isinstance(arg, ast.Lambda):
        parts = list(_and_parts(arg.body))
        if len(parts) < 2:
            return None
        return [
            (replace(shape, arg=ast.copy_location(ast.Lambda(args=arg.args, body=part), arg)), positions.node_span(part))
            for part in parts
        ]
    parts = list(_and_parts(arg))
    if len(parts) < 2:
        return None
    return [(replace(shape, arg=part), positions.node_span(part)) for part in parts]


def _and_parts(expr: ast.expr) -> Iterator[ast.expr]:
    """The operands of a tree of `&` (`a & b & c`, parenthesised in any way), left to right."""
    stack = [expr]
    while stack:
        node = stack.pop()
        if isinstance(node, ast.BinOp) and isinstance(node.op, ast.BitAnd):
            stack += [node.right, node.left]
        else:
            yield node


def _query_parts(shape: Shape, arg: ast.expr, positions: Positions) -> list[tuple[Shape, Span]] | None:
    if not (isinstance(arg, ast.Constant) and isinstance(arg.value, str)):
        return None
    offsets = query_conjuncts(arg.value)
    if offsets is None:
        return None
    parts = []
    for start, end in offsets:
        span = positions.string_part(arg, start, end)
        if span is None:
            return None
        part = ast.copy_location(ast.Constant(value=arg.value[start:end]), arg)
        parts.append((replace(shape, arg=part), span))
    return parts
