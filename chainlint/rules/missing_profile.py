"""`missing-profile`: a comment or the configuration binds a chain to a profile the store does
not hold (a typo, a profile not committed, the wrong store), so the chain is checked against
nothing while the run looks clean."""

from __future__ import annotations

from chainlint.bind.binding import Binding
from chainlint.model import Chain, Finding

NAME = "missing-profile"
LEVEL = "error"
SUMMARY = "a binding to a profile the store lacks"
DESCRIPTION = "A `# chainlint: profile=NAME` comment or `[tool.chainlint.bindings]` names a profile that the profile store does not hold."
HELP = "Profile the data under that name (`chainlint profile DATA --name NAME`), commit the profile, or correct the name or the store."


def check(chain: Chain, binding: Binding) -> list[Finding]:
    if binding.missing is None:
        return []
    return [Finding(NAME, chain.path, chain.span, f"chain on `{chain.frame}` is not checked: {binding.reason}")]
