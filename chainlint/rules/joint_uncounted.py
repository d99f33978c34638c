"""`joint-uncounted` (a note, never a failure): the profile holds joint counts, but never
counted this chain's filters together, and says why (a value known only at run time, a column
the code computes, a chain written after the profile)."""

from __future__ import annotations

from chainlint.model import Finding
from chainlint.rules.base import Rule, Subject
from chainlint.rules.stale_joint import gap_of


def check(subject: Subject) -> list[Finding]:
    plan, why = subject.plan, gap_of(subject, "uncounted")
    if plan is None or why is None:
        return []
    message = (f"filters on `{plan.chain.frame}` are planned as independent: profile `{plan.binding.profile}` has no "
               f"joint counts for them, since {why}")
    return [Finding(RULE.name, plan.chain.path, plan.chain.span, message)]


RULE = Rule(
    name="joint-uncounted",
    level="note",
    summary="filters never counted together",
    description="The chain's filters were never counted together on the data, so they are planned as independent.",
    help=(
        "Filters reading a value known only when the code runs, or a column the code computes, cannot be counted on the data. "
        "A chain written after the profile is counted by `chainlint profile` run again."
    ),
    check=check,
    fails=False,
)
