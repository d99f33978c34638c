"""`unbound` (off by default): a chain no profile describes, so nothing can be estimated."""

from __future__ import annotations

from chainlint.model import Finding
from chainlint.rules.base import Rule, Subject


def check(subject: Subject) -> list[Finding]:
    chain, binding = subject.chain, subject.binding
    if binding.profile is not None:
        return []
    return [Finding(RULE.name, chain.path, chain.span, f"chain on `{chain.frame}` has no profile: {binding.reason}")]


RULE = Rule(
    name="unbound",
    level="note",
    summary="a chain with no profile",
    description='A chain no profile describes, so nothing about its order can be estimated.',
    help="Bind it with `# chainlint: profile=NAME` on the chain's first line, with `[tool.chainlint.bindings]`, or by reading its data with a literal path that a profile records.",
    check=check,
    default=False,
)
