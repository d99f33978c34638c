"""`reorder`: the written order of a chain costs clearly more than the planned one."""

from __future__ import annotations

from chainlint.model import Finding
from chainlint.plan.groups import describe
from chainlint.rules.base import Rule, Subject
from chainlint.units import duration

#: Where the row count came from, when it is not the profile's own.
_ROWS_FROM = {"option": ", from --rows", "configuration": ", set in [tool.chainlint.rows]", "profile": ""}


def check(subject: Subject) -> list[Finding]:
    plan, context = subject.plan, subject.context
    if plan is None or subject.held or plan.as_written:
        return []
    saving = plan.written_seconds - plan.planned_seconds
    if plan.speedup < context.min_gain or saving < context.min_saving:
        return []
    if len(plan.groups[0]) == 1:
        first = plan.chain.steps[plan.order[0]].predicate.canonical()
        advice = f"run `{first}` first: about {plan.speedup:.1f}x faster as {describe(plan.groups)}"
    else:
        advice = f"would run about {plan.speedup:.1f}x faster as {describe(plan.groups)}"
    message = (
        f"{advice} ({duration(plan.written_seconds)} -> {duration(plan.planned_seconds)} at {plan.rows:,} rows"
        f"{_ROWS_FROM[plan.rows_from]})"
    )
    return [Finding(RULE.name, plan.chain.path, plan.chain.span, message, plan.speedup, plan.written_seconds,
                    plan.planned_seconds, plan.order, plan.groups)]


RULE = Rule(
    name="reorder",
    level="warning",
    summary="filters run in a costly order",
    description="The chain's steps run in a form whose estimated cost clearly exceeds that of the cheapest safe plan: move the selective, cheap filters first, or join filters into one mask.",
    help="Each row filter scans the rows it receives and copies every column of the rows it keeps. Running the selective, cheap filters first shrinks what the others scan and copy; joining filters into one mask (`&`) copies the rows once instead of once a filter, at the price of evaluating each of them on every row the mask receives. chainlint estimates selectivities from the chain's profile and costs both orders; steps that depend on the frame they receive never move. `chainlint check --fix` rewrites the chain; `# chainlint: keep reorder` keeps it as written.",
    check=check,
)
