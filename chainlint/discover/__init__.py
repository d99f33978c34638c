"""Discovery: turn the paths a user names into the Python files to analyse."""

from chainlint.discover.walk import DiscoveryError, discover, pattern_problem

__all__ = ["DiscoveryError", "discover", "pattern_problem"]
