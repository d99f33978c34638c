"""Discovery: turn the paths a user names into the Python files to analyse."""

from chainlint.discover.walk import DiscoveryError, discover

__all__ = ["DiscoveryError", "discover"]
