"""`unknown-column`: a chain reads a column its profile does not have (the data or the code
changed, or the binding is wrong)."""

from __future__ import annotations

from chainlint.model import Finding
from chainlint.rules.base import Rule, Subject


def check(subject: Subject) -> list[Finding]:
    plan, estimator = subject.plan, subject.estimator
    if plan is None or estimator is None:
        return []
    findings = []
    for step in plan.chain.steps:
        missing = sorted(step.predicate.columns() - estimator.columns.keys())
        if missing:
            listed = ", ".join(f"`{c}`" for c in missing)
            findings.append(Finding(RULE.name, plan.chain.path, step.span, f"profile `{plan.binding.profile}` has no column {listed}"))
    return findings


RULE = Rule(
    name="unknown-column",
    level="warning",
    summary="a column the profile does not have",
    description="The chain reads a column that its profile does not describe, so its estimates fall back to defaults.",
    help="Re-profile the data if the column is new, or check the chain's binding (`chainlint explain` shows it).",
    check=check,
)
