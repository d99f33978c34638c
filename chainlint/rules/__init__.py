"""Rules: each looks at analysed and planned chains and returns findings. One rule a module."""

from chainlint.rules.base import Finding, RuleContext

__all__ = ["Finding", "RuleContext"]
