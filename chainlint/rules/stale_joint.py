"""`stale-joint` (a note): the profile holds joint counts, but not for this chain's predicates."""

from __future__ import annotations

from chainlint.estimate.selectivity import Estimator
from chainlint.plan.chains import ChainPlan
from chainlint.rules.base import Finding

NAME = "stale-joint"
LEVEL = "note"
SUMMARY = "joint statistics do not cover the chain"
DESCRIPTION = "The chain's profile was made with joint counts (`profile --for`), but not for this chain's predicates: the code changed since."
HELP = (
    "Run `chainlint profile ... --for SRC` again to count how this chain's filters combine; until then it is planned under independence."
)


def check(plan: ChainPlan, estimator: Estimator) -> list[Finding]:
    if not estimator.joint:
        return []
    for segment in plan.chain.segments():
        texts = frozenset(plan.chain.steps[i].predicate.canonical() for i in segment)
        if len(segment) >= 2 and not estimator.joint_covers(texts):
            message = (f"profile `{plan.binding.profile}` has joint statistics, but not for these filters on "
                       f"`{plan.chain.frame}`; they are stale, so the chain is planned under independence")
            return [Finding(NAME, plan.chain.path, plan.chain.span, message)]
    return []
