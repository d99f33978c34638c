"""A group of a statement run written as one statement in the run's own form.

The group's steps stand in consecutive statements once they are in the plan's order
(`chainlint.rewrite.permute`). The first of those statements stays where it is, keeping its
source frame, and filters with the group's one mask (`chainlint.rewrite.fuse`: masks that all
read the frame it filters stay masks, others become a lambda over one name; queries join with
`and`); it takes the name the last statement assigned, so the statements after the group read
what they read before. The other statements disappear whole, with their line breaks: the
comments they owned (the lines directly above them, the one ending their line) follow their
predicates inside the mask, the statement after the group's last keeps its comment at the end of
the statement kept. Whatever stands between them (statements the run steps over, blank lines,
comments no statement owns) stays, in order, after the new statement. `# chainlint:` comments
never move, so none may stand among the statements removed.

Which statements may become one is the finder's judgement (`Step.alone`, `Step.merges`: each
the only filter of a statement `name = frame[...]` alone on its lines, the names that stop being
bound used nowhere else in their scope); it is asked again of the chain found in the reordered
text, and whatever does not hold there is refused with the reason.
"""

from __future__ import annotations

import re

from chainlint.model import Chain, Edit, Span, StepKind
from chainlint.parse.source import SourceText
from chainlint.rewrite.fuse import Groups, fused_edits, mask_group, query_group
from chainlint.rewrite.permute import RewriteError, line_break, line_start

_DIRECTIVE = re.compile(r"#\s*chainlint:")
_TARGET = re.compile(r"(?P<indent>[ \t]*)(?P<name>\w+)(?P<rest>[ \t]*=)")


def run_edits(permuted: SourceText, again: Chain, groups: Groups) -> list[Edit]:
    """The edits of `permuted` that write each group of two or more steps of `again` (the run
    found again there, its steps in the plan's order) as one statement."""
    return fused_edits(permuted, again, groups, _group_edit)


def _group_edit(source: SourceText, chain: Chain, slots, first: int, last: int) -> Edit:  # type: ignore[no-untyped-def]
    """The edit that writes steps `first..last` of a statement run (one statement each) as one
    statement at the place of the first."""
    text = source.text
    steps = chain.steps[first : last + 1]
    if not all(step.alone for step in steps) or not all(step.merges for step in steps[1:]):
        raise RewriteError("the statements to join are not each one filter `name = frame[...]` alone on its lines, "
                           "or a name they assign is used elsewhere")
    if len({step.statement for step in steps}) != len(steps):
        raise RewriteError("the steps to join do not stand in statements of their own")
    families = {"query" if s.kind is StepKind.QUERY else "mask" for s in steps}
    if len(families) != 1 or any(s.kind is StepKind.DROPNA for s in steps):
        raise RewriteError("only lambdas and masks, or only queries, are joined into one mask")
    kept = slots[first]
    if kept.close < 0 or any(slot.close < 0 or slot.anchor < 0 or slot.fixed for slot in slots[first + 1 : last + 1]):
        raise RewriteError("a statement to remove does not stand alone on its lines, or holds a `# chainlint:` comment")
    breaker = line_break(text)
    # The statements to remove: the line break before their own comment lines above them, to
    # their line's end (inside a notebook's cell, whose last line has no break of its own).
    removed = []
    for slot in slots[first + 1 : last + 1]:
        begin = slot.lead_start if slot.lead_start >= 0 else slot.anchor
        removed.append((begin - len(_break_before(text, begin)), slot.line_end))
    region_end = removed[-1][1]
    if _DIRECTIVE.search(text[kept.line_end : region_end]):
        raise RewriteError("a `# chainlint:` comment among the statements to join would change what it applies to")
    cursor, rest = kept.line_end, []
    for begin, end in removed:
        rest.append(text[cursor:begin])
        cursor = end
    comments = []
    for k in range(first, last + 1):
        slot = slots[k]
        lead = text[slot.lead_start : slot.anchor].splitlines() if k > first and slot.lead_start >= 0 else []
        comments.append(([line.strip() for line in lead if line.strip()], slot.trail.strip() if k < last else ""))
    begin = line_start(source, kept.start)
    head = text[begin : kept.start]
    indent = re.match(r"[ \t]*", head).group() + "    "  # type: ignore[union-attr]
    body = (query_group if families == {"query"} else mask_group)(source, steps, comments, indent).replace("\n", breaker)
    target = _TARGET.match(head)
    assigned = _TARGET.match(text[slots[last].anchor : slots[last].start])
    if target is None or assigned is None:
        raise RewriteError("a statement to join does not start with the name it assigns")
    if assigned.group("name") == target.group("name"):
        begin, head = kept.start, ""  # the same name: the edit starts at the step
    else:
        head = target.group("indent") + assigned.group("name") + head[target.end("name") :]
    new = head + body + text[kept.end : kept.close] + slots[last].trail + kept.fixed + "".join(rest)
    line, column = source.position(begin)
    end_line, end_column = source.position(region_end)
    return Edit(begin, region_end, new, Span(line, column, end_line, end_column))


def _break_before(text: str, offset: int) -> str:
    """The line break ending right before `offset`, or ''."""
    if text.endswith("\r\n", 0, offset):
        return "\r\n"
    return text[offset - 1] if offset > 0 and text[offset - 1] in "\r\n" else ""
