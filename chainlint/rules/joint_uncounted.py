"""`joint-uncounted` (a note, never a failure): the profile holds joint counts, but never
counted this chain's filters together, and says why (a value known only at run time, a column
the code computes, a chain written after the profile)."""

from __future__ import annotations

from chainlint.estimate.selectivity import Estimator
from chainlint.model import Finding
from chainlint.plan.chains import ChainPlan
from chainlint.rules.stale_joint import gap

NAME = "joint-uncounted"
LEVEL = "note"
FAILS = False
SUMMARY = "filters never counted together"
DESCRIPTION = "The chain's filters were never counted together on the data, so they are planned as independent."
HELP = (
    "Filters reading a value known only when the code runs, or a column the code computes, cannot be counted on the data. "
    "A chain written after the profile is counted by `chainlint profile` run again."
)


def check(plan: ChainPlan, estimator: Estimator, site: str) -> list[Finding]:
    found = gap(plan, estimator, site)
    if found is None or found[0] != "uncounted":
        return []
    message = (f"filters on `{plan.chain.frame}` are planned as independent: profile `{plan.binding.profile}` has no "
               f"joint counts for them, since {found[1]}")
    return [Finding(NAME, plan.chain.path, plan.chain.span, message)]
