"""`reorder`: the written order of a chain costs clearly more than the planned one."""

from __future__ import annotations

from chainlint.plan.chains import ChainPlan
from chainlint.rules.base import Finding, RuleContext

NAME = "reorder"
LEVEL = "warning"
DESCRIPTION = "The chain's steps run in an order whose estimated cost clearly exceeds that of the cheapest safe order: move the selective, cheap filters first."
HELP = (
    "Each row filter scans the rows it receives and copies every column of the rows it keeps. Running the selective, cheap filters first shrinks what the others scan and copy. chainlint estimates selectivities from the chain's profile and costs both orders; steps that depend on the frame they receive never move. `chainlint check --fix` rewrites the chain; `# chainlint: keep reorder` keeps it as written."
)
SUMMARY = "filters run in a costly order"


def _milliseconds(seconds: float) -> str:
    return f"{seconds * 1e3:.1f} ms" if seconds < 10 else f"{seconds:.1f} s"


def check(plan: ChainPlan, context: RuleContext) -> list[Finding]:
    if plan.order == tuple(range(len(plan.chain.steps))):
        return []
    saving = plan.written_seconds - plan.planned_seconds
    if plan.speedup < context.min_gain or saving < context.min_saving:
        return []
    first = plan.chain.steps[plan.order[0]].predicate.canonical()
    order = ", ".join(str(i + 1) for i in plan.order)
    message = (
        f"{len(plan.chain.steps)} filters on `{plan.chain.frame}` would run about {plan.speedup:.1f}x faster "
        f"as steps {order} ({_milliseconds(plan.written_seconds)} -> {_milliseconds(plan.planned_seconds)} "
        f"for {plan.rows:,} rows of profile `{plan.binding.profile}`); start with `{first}`"
    )
    return [Finding(NAME, plan.chain.path, plan.chain.span, message, plan.speedup, plan.written_seconds,
                    plan.planned_seconds, plan.order)]
