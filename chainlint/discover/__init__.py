"""Discovery: turn the paths a user names into the Python files to analyse."""

from chainlint.discover.walk import DiscoveryProblem, discover, pattern_problem

__all__ = ["DiscoveryProblem", "discover", "pattern_problem"]
