"""The edit that puts a chain's steps into a new order, and nothing else.

Every step keeps its own text; the text between steps (blanks, line breaks, parentheses,
backslash continuations, comments on lines of their own) stays where it is, so the chain keeps
its layout. In a chain written one step per line, a step's trailing comment (`# rare`) moves
with it. A mask that would end up filtering another frame than the one it names is written as
a lambda over that name (`[x.b > 2]` becomes `[lambda x: x.b > 2]`), so that it is computed on
the rows it receives instead of being realigned from another frame by index. (Masks that are
realigned as written, outer masks, are barriers and never move.)
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from chainlint.analysis.model import Chain, Span, Step
from chainlint.parse.source import SourceText

_TRAILING_COMMENT = re.compile(r"[ \t]*#[^\r\n]*")


class RewriteError(Exception):
    """A chain that cannot be rewritten safely; the message says why."""


@dataclass(frozen=True)
class Edit:
    """Replace characters `start`..`end` of the file's text (0-based offsets) with `text`."""

    start: int
    end: int
    text: str
    span: Span


def _offset(source: SourceText, line: int, column: int) -> int:
    return source.line_starts[line - 1] + column - 1


def _render(source: SourceText, step: Step, slot: Step) -> str:
    """The text of `step` when it takes the place of `slot`."""
    text = source.text[_offset(source, step.span.line, step.span.column) : _offset(source, step.span.end_line, step.span.end_column)]
    if not step.kind.endswith("mask"):
        return text
    if step is slot or (step.mask_name is not None and step.mask_name == slot.own):
        return text
    name = step.mask_name or ""
    if not name.isidentifier():
        raise RewriteError(f"the mask reads `{name}`, which cannot become a lambda parameter; write the step as a lambda")
    assert step.mask_span is not None
    start = _offset(source, step.span.line, step.span.column)
    mask_start = _offset(source, step.mask_span.line, step.mask_span.column) - start
    return text[:mask_start] + f"lambda {name}: " + text[mask_start:]


def chain_edit(source: SourceText, chain: Chain, order: tuple[int, ...]) -> Edit:
    """The edit that applies `order` (step indices in their new order) to `chain`."""
    steps = chain.steps
    if sorted(order) != list(range(len(steps))):
        raise RewriteError("the order is not a permutation of the chain's steps")
    if tuple(order) == tuple(range(len(steps))):
        raise RewriteError("the chain is already in this order")
    segment_of = {i: n for n, segment in enumerate(chain.segments()) for i in segment}
    for position, index in enumerate(order):
        if index == position:
            continue
        if not steps[index].movable:
            raise RewriteError(f"step {index + 1} may not move: {steps[index].barrier.reason}")  # type: ignore[union-attr]
        if segment_of.get(position) != segment_of[index]:
            raise RewriteError(f"step {index + 1} may not move across a barrier")
    starts = [_offset(source, s.span.line, s.span.column) for s in steps]
    ends = [_offset(source, s.span.end_line, s.span.end_column) for s in steps]
    text = source.text
    gaps = [text[ends[k] : starts[k + 1]] for k in range(len(steps) - 1)]
    trails = [""] * len(steps)
    one_per_line = chain.form == "method" and all("\n" in gap or "\r" in gap for gap in gaps)
    end = ends[-1]
    if one_per_line:
        for k, gap in enumerate(gaps):
            match = _TRAILING_COMMENT.match(gap)
            if match:
                trails[k] = match.group()
                gaps[k] = gap[match.end() :]
        match = _TRAILING_COMMENT.match(text, end)
        if match:
            trails[-1] = match.group()
            end = match.end()
    pieces = []
    for position, index in enumerate(order):
        pieces.append(_render(source, steps[index], steps[position]) + trails[index])
        if position < len(gaps):
            pieces.append(gaps[position])
    first = steps[0].span
    end_line, end_column = source.position(end)
    return Edit(starts[0], end, "".join(pieces), Span(first.line, first.column, end_line, end_column))


def apply_edits(text: str, edits: list[Edit]) -> str:
    """Apply non-overlapping edits to a text."""
    ordered = sorted(edits, key=lambda e: e.start)
    for before, after in zip(ordered, ordered[1:]):
        if after.start < before.end:
            raise RewriteError("two edits overlap")
    for edit in reversed(ordered):
        text = text[: edit.start] + edit.text + text[edit.end :]
    return text
