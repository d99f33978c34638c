"""Rules: each looks at one planned chain and returns findings. One rule a module, each holding
one `Rule` object; `RULES` is the tuple the engine loops over."""

from chainlint.rules import joint_uncounted, missing_profile, never_matches, reorder, stale_joint, unbound, unknown_column
from chainlint.rules.base import Rule, RuleContext, Subject

#: Every rule, in the order rules are listed to users (and in SARIF `tool.driver.rules`).
RULES: tuple[Rule, ...] = tuple(module.RULE for module in (
    reorder, never_matches, unknown_column, missing_profile, stale_joint, joint_uncounted, unbound))

#: Each rule's severity as a SARIF level (`error`, `warning`, `note`): the one table that SARIF
#: output and the language server's diagnostics both read.
LEVELS = {rule.name: rule.level for rule in RULES}

#: Rules by name, as options and configuration name them.
BY_NAME = {rule.name: rule for rule in RULES}

#: The rules that run unless asked otherwise, and those whose findings fail a run.
DEFAULT = frozenset(rule.name for rule in RULES if rule.default)
FAILING = frozenset(rule.name for rule in RULES if rule.fails)

__all__ = ["BY_NAME", "DEFAULT", "FAILING", "LEVELS", "RULES", "Rule", "RuleContext", "Subject"]
