"""The edit that puts a chain's steps into a new order, and nothing else.

Every step keeps its own text; the text between steps (blanks, line breaks, parentheses,
backslash continuations, `x = x` of a statement run) stays where it is, so the chain keeps its
layout. A step alone on its line owns the comment that ends that line and the comment lines
directly above it, and they move with it; `# chainlint:` directives never move. A comment is
never put before code: when a step lands where code follows it on the line, its comment goes
to the end of that line, or the rewrite is refused. A mask that would end up filtering another
frame than the one it names is written as a lambda over that name (`[x.b > 2]` becomes
`[lambda x: x.b > 2]`), so that it is computed on the rows it receives instead of being
realigned from another frame by index; never in a class body, where a lambda cannot see the
class's names. (Masks that are realigned as written, outer masks, are barriers and never move.)
"""

from __future__ import annotations

import ast
import bisect
import re
from dataclasses import dataclass
from functools import lru_cache

from chainlint.model import Chain, ChainForm, ChainlintError, Edit, Span, Step
from chainlint.parse.source import SourceText

#: What may follow a step on its line for the line's comment to be the step's.
_LINE_REST = re.compile(r"(?P<close>[ \t)\]},;]*?)(?P<comment>[ \t]*#[^\r\n]*)?")
_DIRECTIVE = re.compile(r"#\s*chainlint:")
#: The start of a statement of a run, before its first step: `x = x`.
_RUN_PREFIX = re.compile(r"[ \t]*[\w.]+[ \t]*=[ \t]*[\w.]+[ \t]*")


class RewriteError(ChainlintError):
    """A chain that cannot be rewritten safely; the message says why."""


def _offset(source: SourceText, line: int, column: int) -> int:
    return source.line_starts[line - 1] + column - 1


def _render(source: SourceText, step: Step, slot: Step, start: int) -> str:
    """The text of `step` when it takes the place of `slot`."""
    text = source.text[_offset(source, step.span.line, step.span.column) : _offset(source, step.span.end_line, step.span.end_column)]
    if not step.kind.is_mask:
        return text
    if step is slot or (step.mask_name is not None and step.mask_name == slot.own):
        return text
    name = step.mask_name or ""
    if not name.isidentifier():
        raise RewriteError(f"the mask reads `{name}`, which cannot become a lambda parameter; write the step as a lambda")
    if in_class_body(source.text, start):
        raise RewriteError(f"the mask `{name}` would become a lambda in a class body, where a lambda cannot see the class's names; write the step as a lambda")
    assert step.mask_span is not None
    begin = _offset(source, step.span.line, step.span.column)
    mask_start = _offset(source, step.mask_span.line, step.mask_span.column) - begin
    return text[:mask_start] + f"lambda {name}: " + text[mask_start:]


@dataclass
class _Slot:
    """A step's place in the text, with the comments it owns."""

    start: int
    end: int
    line_end: int  # the end of the step's last line (before its line break)
    close: int = -1  # when only closing brackets and a comment follow the step: where they end
    trail: str = ""  # the comment ending its line, when the step owns it (blanks before it included)
    fixed: str = ""  # the comment ending its line when the step does not own it (a directive)
    lead_start: int = -1  # the comment lines directly above it: lead_start..anchor
    anchor: int = -1  # the start of its line, when comment lines above it may be its own


def _line_end(source: SourceText, offset: int) -> int:
    """Where the line holding `offset` ends, before its line break (found by the source's
    lines: a search for a break character that the file lacks would read to its end)."""
    line = source.position(offset)[0]
    return source.line_starts[line - 1] + len(source.lines[line - 1].rstrip("\r\n"))


def line_start(source: SourceText, offset: int) -> int:
    """Where the line holding `offset` starts."""
    return source.line_starts[source.position(offset)[0] - 1]


@lru_cache(maxsize=8)
def line_break(text: str) -> str:
    """The text's line break: `\r\n` or `\r` where it holds one, else `\n`."""
    return "\r\n" if "\r\n" in text else "\r" if "\r" in text else "\n"


def step_slots(source: SourceText, chain: Chain) -> list[_Slot]:
    text = source.text
    steps = chain.steps
    slots = []
    for index, step in enumerate(steps):
        start = _offset(source, step.span.line, step.span.column)
        end = _offset(source, step.span.end_line, step.span.end_column)
        slot = _Slot(start, end, _line_end(source, end))
        before_alone = index == 0 or steps[index - 1].span.end_line < step.span.line
        after_alone = index == len(steps) - 1 or steps[index + 1].span.line > step.span.end_line
        if chain.form is ChainForm.STATEMENTS:
            before_alone = before_alone and (index == 0 or steps[index - 1].statement != step.statement)
        match = _LINE_REST.fullmatch(text, end, slot.line_end)
        if match and after_alone:
            slot.close = match.end("close")
            comment = match.group("comment") or ""
            if before_alone and not _DIRECTIVE.search(comment):
                slot.trail = comment
            else:
                slot.fixed = comment
        begin = line_start(source, start)
        prefix = text[begin:start]
        leads = not prefix.strip() if chain.form is ChainForm.METHOD else _RUN_PREFIX.fullmatch(prefix) is not None
        if before_alone and after_alone and leads and (step.span.line > chain.span.line or chain.form is ChainForm.STATEMENTS):
            lead_start = _lead_start(source, step.span.line)
            # Above a run's first statement, a `# chainlint:` comment over the comment lines
            # would start or stop applying to the run if they moved.
            if step.span.line > chain.span.line or not _directive_above(source, source.position(lead_start)[0]):
                slot.anchor, slot.lead_start = begin, lead_start
        slots.append(slot)
    return slots


def _directive_above(source: SourceText, line: int) -> bool:
    """Whether a `# chainlint:` comment is on the line above `line`."""
    return line > 1 and _DIRECTIVE.search(source.lines[line - 2]) is not None


def _lead_start(source: SourceText, line: int) -> int:
    """The start of the run of comment lines (no directives) directly above `line`."""
    first = line
    while first > 1:
        above = source.lines[first - 2].strip()
        if not above.startswith("#") or _DIRECTIVE.search(above):
            break
        first -= 1
    return source.line_starts[first - 1]


def chain_edit(source: SourceText, chain: Chain, order: tuple[int, ...]) -> Edit:
    """The edit that applies `order` (step indices in their new order) to `chain`, a method
    chain or a statement run (`chainlint.rewrite.fuse` splits a mask written whole)."""
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
    text = source.text
    slots = step_slots(source, chain)
    moved_leads = any(slots[i].lead_start < slots[i].anchor for p, i in enumerate(order) if p != i)
    first = slots[0]
    begin = first.lead_start if moved_leads and first.anchor >= 0 else first.start
    pieces: list[str] = []
    cursor = begin
    for position, index in enumerate(order):
        slot, step = slots[position], slots[index]
        lead = text[step.lead_start : step.anchor]
        if moved_leads and slot.anchor >= 0:
            pieces.append(text[cursor : slot.lead_start] + lead)
            cursor = slot.anchor
        elif lead and index != position:
            raise RewriteError(f"the comment above step {index + 1} cannot follow it to its new place")
        pieces.append(text[cursor : slot.start])
        pieces.append(_render(source, steps[index], steps[position], slot.start))
        cursor = slot.end
        if slot.close >= 0:
            pieces.append(text[cursor : slot.close] + step.trail + slot.fixed)
            cursor = slot.line_end
        elif step.trail:
            later = position + 1 < len(slots) and slots[position + 1].start < slot.line_end
            rest = text[slot.end : slot.line_end]
            if later or any(char in rest for char in "#'\"\\"):
                raise RewriteError(f"the comment of step {index + 1} cannot follow it: code follows its new place on the line")
            # After the code that follows the step on its new line, never before it.
            pieces.append(rest.rstrip(" \t") + step.trail)
            cursor = slot.line_end
    end_line, end_column = source.position(cursor)
    start_line, start_column = source.position(begin)
    return Edit(begin, cursor, "".join(pieces), Span(start_line, start_column, end_line, end_column))


@dataclass(frozen=True)
class _Bodies:
    """The bodies of a module's classes, functions and lambdas as character ranges, sorted by
    start (outer first), each with the index of the nearest range around it: the innermost
    body around an offset is found by a bisection and a walk outwards."""

    starts: tuple[int, ...]
    ends: tuple[int, ...]
    classes: tuple[bool, ...]
    parents: tuple[int, ...]  # -1: none around it

    def in_class(self, offset: int) -> bool:
        index = bisect.bisect_right(self.starts, offset) - 1
        while index >= 0 and self.ends[index] <= offset:
            index = self.parents[index]
        return index >= 0 and self.classes[index]


@lru_cache(maxsize=8)
def _class_bodies(text: str) -> _Bodies:
    """The class bodies and function bodies of `text`."""
    try:
        tree = ast.parse(text)
    except (SyntaxError, ValueError, RecursionError, MemoryError):
        return _Bodies((0,), (len(text),), (True,), (-1,))  # unknown: assume the worst
    lines = text.splitlines(keepends=True)
    starts = [0]
    for line in lines:
        starts.append(starts[-1] + len(line))

    def offset(line: int, byte_column: int) -> int:
        return starts[line - 1] + len(lines[line - 1].encode("utf-8")[:byte_column].decode("utf-8", "replace"))

    ranges = []
    for node in ast.walk(tree):
        if isinstance(node, (ast.ClassDef, ast.FunctionDef, ast.AsyncFunctionDef)):
            body_first, body_last = node.body[0], node.body[-1]
            ranges.append((offset(body_first.lineno, body_first.col_offset),
                           offset(body_last.end_lineno or body_last.lineno, body_last.end_col_offset or 0),
                           isinstance(node, ast.ClassDef)))
        elif isinstance(node, ast.Lambda):
            ranges.append((offset(node.body.lineno, node.body.col_offset),
                           offset(node.body.end_lineno or node.body.lineno, node.body.end_col_offset or 0), False))
    # Of equal ranges the first met in the walk counts: it sorts last, next to the offsets in it.
    ordered = sorted(range(len(ranges)), key=lambda n: (ranges[n][0], -ranges[n][1], -n))
    parents: list[int] = []
    around: list[int] = []  # the ranges holding the current one, innermost last
    for position, n in enumerate(ordered):
        start, end, _ = ranges[n]
        while around and not (ranges[ordered[around[-1]]][0] <= start and end <= ranges[ordered[around[-1]]][1]):
            around.pop()
        parents.append(around[-1] if around else -1)
        around.append(position)
    return _Bodies(tuple(ranges[n][0] for n in ordered), tuple(ranges[n][1] for n in ordered),
                   tuple(ranges[n][2] for n in ordered), tuple(parents))


def in_class_body(text: str, offset: int) -> bool:
    """Whether code at `offset` runs in a class body's scope (the innermost scope around it)."""
    return _class_bodies(text).in_class(offset)


def apply_edits(text: str, edits: list[Edit]) -> str:
    """Apply non-overlapping edits to a text."""
    ordered = sorted(edits, key=lambda e: e.start)
    for before, after in zip(ordered, ordered[1:]):
        if after.start < before.end:
            raise RewriteError("two edits overlap")
    pieces, cursor = [], 0
    for edit in ordered:
        pieces += [text[cursor : edit.start], edit.text]
        cursor = edit.end
    return "".join(pieces) + text[cursor:]
