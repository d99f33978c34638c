"""`never-matches`: an equality or membership literal that an exact profile never saw."""

from __future__ import annotations

import difflib

from chainlint.ir import And, Column, Compare, Literal, Member, Node, Not, Or
from chainlint.model import Finding
from chainlint.rules.base import Rule, Subject


def _tests(node: Node):  # type: ignore[no-untyped-def]
    """(column, literal) pairs tested for equality anywhere in the predicate."""
    if isinstance(node, (And, Or)):
        for part in node.parts:
            yield from _tests(part)
    elif isinstance(node, Not):
        yield from _tests(node.operand)
    elif isinstance(node, Compare) and node.op in ("==", "!=") and isinstance(node.left, Column) and isinstance(node.right, Literal):
        yield node.left.name, node.right.value
    elif isinstance(node, Member) and isinstance(node.operand, Column) and isinstance(node.values, tuple):
        for value in node.values:
            if isinstance(value, Literal):
                yield node.operand.name, value.value


def check(subject: Subject) -> list[Finding]:
    plan, estimator = subject.plan, subject.estimator
    if plan is None or estimator is None:
        return []
    findings = []
    min_count = estimator.profile.settings.min_count
    for step in plan.chain.steps:
        for column, value in _tests(step.predicate):
            stats = estimator.columns.get(column)
            if stats is None or value is None:
                continue
            if not stats.complete or stats.redacted or stats.lookup(value) in stats.mcv:
                continue
            if any(isinstance(v, str) for v in stats.mcv) != isinstance(value, str):
                continue
            known = [str(v) for v in stats.mcv]
            close = difflib.get_close_matches(str(value), known, n=3, cutoff=0.5)
            hint = f"; did you mean {' or '.join(repr(c) for c in close)}?" if close else ""
            if stats.suppressed_values:
                seen = f"holds {value!r} in fewer than {min_count} rows of profile `{plan.binding.profile}`, if at all"
            else:
                seen = f"never holds {value!r} in profile `{plan.binding.profile}`"
            message = (f"`{column}` {seen} ({len(known)} known values){hint or '.'} "
                       f"The chain's order will be planned once this literal is fixed.")
            values = {str(v): v for v in stats.mcv}
            # A conjunct of one written mask is located by its own text, not the whole mask.
            findings.append(Finding(RULE.name, plan.chain.path, step.conjunct or step.span, message, literal=value,
                                    suggestions=tuple(values[c] for c in close)))
    return findings


RULE = Rule(
    name="never-matches",
    level="warning",
    summary="a literal the data never holds",
    description='An equality or membership literal that an exact profile of the data never saw: a typo, or data that changed.',
    help='The profile lists every value the column holds at least `min_count` times. A literal not among them matches no row (or very few). The message suggests the closest known values.',
    check=check,
    holds_order=True,
)
