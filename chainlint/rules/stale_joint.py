"""`stale-joint`: the profile counted this chain's filters together once, and the code changed
since, so its joint counts no longer cover the chain."""

from __future__ import annotations

import os
from datetime import UTC, datetime

from chainlint.estimate.selectivity import Estimator
from chainlint.evaluate.support import uncountable
from chainlint.plan.chains import ChainPlan
from chainlint.model import Finding
from chainlint.rules.base import Rule, Subject


def gap(plan: ChainPlan, estimator: Estimator, site: str) -> tuple[str, str] | None:
    """("stale" | "uncounted", why) for the first segment of two or more movable steps that the
    profile's joint counts do not cover, or None. Only profiles made with joint counts have
    gaps."""
    if estimator.profile.joint is None:
        return None
    name = plan.binding.profile
    for segment in plan.chain.segments():
        steps = [plan.chain.steps[i] for i in segment]
        texts = frozenset(step.predicate.canonical() for step in steps)
        if len(segment) < 2 or estimator.joint_covers(texts):
            continue
        for step in steps:
            reason = uncountable(step.predicate)
            if reason:
                return "uncounted", f"`{step.predicate.canonical()}` cannot be counted on data: {reason}"
            redacted = sorted(step.predicate.columns() & set(estimator.profile.settings.redacted))
            if redacted:
                return "uncounted", f"`{step.predicate.canonical()}` reads `{redacted[0]}`, a redacted column, whose counts are not stored"
            missing = sorted(step.predicate.columns() - estimator.columns.keys())
            if missing:
                return "uncounted", (f"`{step.predicate.canonical()}` reads `{missing[0]}`, which the data of profile "
                                     f"`{name}` does not have (a column the code computes?)")
        for entry in estimator.profile.joint:
            if texts & set(entry.predicates) and (entry.chains is None or site in entry.chains):
                return "stale", ""
        created = estimator.profile.created
        if _modified_after(plan.chain.path, created):
            return "uncounted", f"its file changed after profile `{name}` was made ({created})"
        return "uncounted", f"it was not among the chains counted when profile `{name}` was made"
    return None


def _modified_after(path: str, created: str) -> bool:
    try:
        made = datetime.strptime(created, "%Y-%m-%dT%H:%M:%SZ").replace(tzinfo=UTC).timestamp()
        return os.stat(path).st_mtime > made + 1
    except (OSError, ValueError):
        return False


def gap_of(subject: Subject, kind: str) -> str | None:
    """Why the profile's joint counts miss the subject's chain, when they miss it as `kind`
    ("stale" or "uncounted") says; else None."""
    if subject.plan is None or subject.estimator is None:
        return None
    found = gap(subject.plan, subject.estimator, subject.site)
    return found[1] if found is not None and found[0] == kind else None


def check(subject: Subject) -> list[Finding]:
    plan = subject.plan
    if plan is None or gap_of(subject, "stale") is None:
        return []
    message = (f"profile `{plan.binding.profile}` counted these filters on `{plan.chain.frame}` together, but the chain "
               "changed since; it is planned under independence until the data is profiled again")
    return [Finding(RULE.name, plan.chain.path, plan.chain.span, message)]


RULE = Rule(
    name="stale-joint",
    level="warning",
    summary="joint counts made for an earlier version of the chain",
    description="The profile counted how this chain's filters combine, but the chain changed since: its joint counts no longer cover it.",
    help="Run `chainlint profile` again to count how the chain's filters combine now; until then it is planned under independence.",
    check=check,
)
