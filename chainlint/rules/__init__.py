"""Rules: each looks at analysed and planned chains and returns findings. One rule a module."""

from chainlint.rules import joint_uncounted, missing_profile, never_matches, reorder, stale_joint, unbound, unknown_column
from chainlint.rules.base import RuleContext

#: Every rule module, in the order rules are listed to users (and in SARIF `tool.driver.rules`).
CATALOG = (reorder, never_matches, unknown_column, missing_profile, stale_joint, joint_uncounted, unbound)

#: Each rule's severity as a SARIF level (`error`, `warning`, `note`): the one table that SARIF
#: output and the language server's diagnostics both read.
LEVELS = {module.NAME: module.LEVEL for module in CATALOG}

__all__ = ["CATALOG", "LEVELS", "RuleContext", "joint_uncounted", "missing_profile", "never_matches", "reorder",
           "stale_joint", "unbound", "unknown_column"]
