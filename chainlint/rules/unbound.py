"""`unbound` (off by default): a chain no profile describes, so nothing can be estimated."""

from __future__ import annotations

from chainlint.bind.binding import Binding
from chainlint.model import Chain, Finding

NAME = "unbound"
LEVEL = "note"
DESCRIPTION = 'A chain no profile describes, so nothing about its order can be estimated.'
HELP = (
    "Bind it with `# chainlint: profile=NAME` on the chain's first line, with `[tool.chainlint.bindings]`, or by reading its data with a literal path that a profile records."
)
SUMMARY = "a chain with no profile"


def check(chain: Chain, binding: Binding) -> list[Finding]:
    if binding.profile is not None:
        return []
    return [Finding(NAME, chain.path, chain.span, f"chain on `{chain.frame}` has no profile: {binding.reason}")]
