"""Which steps of a chain may be written inside one mask with others, told where the chain is
found, so that the planner offers no group the rewriter (`rewrite/fuse.py`, `rewrite/runs.py`)
would refuse to write. A step that may move but joins no mask says why (`Step.apart`), and
`explain` shows it.

The rewriter cannot write: a step holding a comment inside its own text (one mask has no place
for it); steps on either side of a `# chainlint:` comment (it stays where it is written, and
would apply to other steps); a query whose text is not one string literal, or whose options
differ from another query's of the chain (one call passes one set); in a class body, a mask
joined with a step that is not a mask over the same frame (the group would be a lambda, which
cannot see the class's names).
"""

from __future__ import annotations

import ast
import io
import re
import tokenize
from collections.abc import Sequence
from dataclasses import replace

from chainlint.find.positions import Positions
from chainlint.find.shapes import Shape, keyword
from chainlint.model import Step, StepKind

_DIRECTIVE = re.compile(r"#\s*chainlint:")
_MASKS = (StepKind.LOC_MASK, StepKind.GETITEM_MASK)


def with_apart(steps: Sequence[Step], shapes: Sequence[Shape], positions: Positions, class_body: bool,
               run: bool = False) -> tuple[Step, ...]:
    """`steps` (built from `shapes`, one each) with `apart` set where a step may join no mask;
    `run`: the steps of a statement run, whose first statement keeps its own comments."""
    reasons: list[str | None] = [_own_reason(step, positions) for step in steps]
    options: list[str | None] = [None] * len(steps)
    for index, (step, shape) in enumerate(zip(steps, shapes)):
        if step.kind is StepKind.QUERY and reasons[index] is None:
            call = shape.node
            assert isinstance(call, ast.Call)
            if query_text(call) is None:
                reasons[index] = "its query text is not one string literal: no query joins it"
            else:
                options[index] = ", ".join(positions.text_of(k) for k in call.keywords if k.arg != "expr")
    if len({o for o in options if o is not None}) > 1:
        for index, option in enumerate(options):
            if option:
                reasons[index] = f"it passes options (`{option}`) another query of the chain does not: one query cannot hold both"
    if class_body:
        masks = [index for index, step in enumerate(steps) if step.kind in _MASKS]
        name = steps[masks[0]].mask_name if masks else None
        if masks and any(step.kind not in _MASKS or step.mask_name != step.own or step.mask_name != name
                         for step in steps if step.movable and step.kind is not StepKind.DROPNA):
            for index in masks:
                if reasons[index] is None:
                    reasons[index] = ("a mask in a class body: joined with these steps it would become a lambda, "
                                      "which cannot see the class's names")
    if len(steps) > 1 and _directive_among(steps, positions, run):
        reasons = [reason or "a `# chainlint:` comment among the chain's steps stays where it is written: "
                             "no steps are joined across it" for reason in reasons]
    return tuple(replace(step, apart=reason) if reason else step for step, reason in zip(steps, reasons))


def query_text(call: ast.Call) -> ast.Constant | None:
    """The string literal a `.query` call passes as its text, by position or as `expr=` (the
    same parameter of pandas' `DataFrame.query`), with no other argument by position."""
    text = call.args[0] if len(call.args) == 1 else keyword(call, "expr") if not call.args else None
    return text if isinstance(text, ast.Constant) and isinstance(text.value, str) else None


def _own_reason(step: Step, positions: Positions) -> str | None:
    """Why the step's own text cannot stand inside one mask: a comment inside it."""
    text = _text(step, positions)
    if "#" not in text:
        return None
    try:
        tokens = list(tokenize.generate_tokens(io.StringIO("(_" + text + "\n)").readline))
    except (tokenize.TokenError, SyntaxError):
        return "its text cannot be read on its own: it joins no mask"
    if any(token.type == tokenize.COMMENT for token in tokens):
        return "a comment inside the step has no place in one mask"
    return None


def _text(step: Step, positions: Positions) -> str:
    source = positions.source
    span = step.span
    start = source.line_starts[span.line - 1] + span.column - 1
    end = source.line_starts[span.end_line - 1] + span.end_column - 1
    return source.text[start:end]


def _directive_among(steps: Sequence[Step], positions: Positions, run: bool) -> bool:
    """Whether a `# chainlint:` comment stands between the first step and the last: from the
    first step's start (in a run, from the end of its statement's line, which the statement
    kept in place keeps), to the last step's start."""
    source = positions.source
    first, last = steps[0].span, steps[-1].span
    begin = source.line_starts[first.line - 1] + first.column - 1
    if run:
        begin = source.line_starts[first.end_line - 1] + len(source.lines[first.end_line - 1].rstrip("\r\n"))
    end = source.line_starts[last.line - 1] + last.column - 1
    return begin < end and _DIRECTIVE.search(source.text, begin, end) is not None
