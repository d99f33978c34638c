"""`missing-profile`: a comment or the configuration binds a chain to a profile the store does
not hold (a typo, a profile not committed, the wrong store), so the chain is checked against
nothing while the run looks clean."""

from __future__ import annotations

from chainlint.model import Finding
from chainlint.rules.base import Rule, Subject


def check(subject: Subject) -> list[Finding]:
    chain, binding = subject.chain, subject.binding
    if binding.missing is None:
        return []
    return [Finding(RULE.name, chain.path, chain.span, f"chain on `{chain.frame}` is not checked: {binding.reason}")]


RULE = Rule(
    name="missing-profile",
    level="error",
    summary="a binding to a profile the store lacks",
    description="A `# chainlint: profile=NAME` comment or `[tool.chainlint.bindings]` names a profile that the profile store does not hold.",
    help="Profile the data under that name (`chainlint profile DATA --name NAME`), commit the profile, or correct the name or the store.",
    check=check,
)
