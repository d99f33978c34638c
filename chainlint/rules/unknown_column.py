"""`unknown-column`: a chain reads a column its profile does not have (the data or the code
changed, or the binding is wrong)."""

from __future__ import annotations

from chainlint.estimate.selectivity import Estimator
from chainlint.model import Finding
from chainlint.plan.chains import ChainPlan

NAME = "unknown-column"
LEVEL = "warning"
SUMMARY = "a column the profile does not have"
DESCRIPTION = "The chain reads a column that its profile does not describe, so its estimates fall back to defaults."
HELP = "Re-profile the data if the column is new, or check the chain's binding (`chainlint explain` shows it)."


def check(plan: ChainPlan, estimator: Estimator) -> list[Finding]:
    findings = []
    for step in plan.chain.steps:
        missing = sorted(step.predicate.columns() - estimator.columns.keys())
        if missing:
            listed = ", ".join(f"`{c}`" for c in missing)
            findings.append(Finding(NAME, plan.chain.path, step.span, f"profile `{plan.binding.profile}` has no column {listed}"))
    return findings
