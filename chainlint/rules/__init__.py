"""Rules: each looks at analysed and planned chains and returns findings. One rule a module."""

from chainlint.rules import joint_uncounted, never_matches, reorder, stale_joint, unbound, unknown_column
from chainlint.rules.base import Finding, RuleContext

#: Every rule module, in the order rules are listed to users (and in SARIF `tool.driver.rules`).
CATALOG = (reorder, never_matches, unknown_column, stale_joint, joint_uncounted, unbound)

__all__ = ["CATALOG", "Finding", "RuleContext", "joint_uncounted", "never_matches", "reorder", "stale_joint", "unbound", "unknown_column"]
