"""The error every data reader raises."""

from chainlint.model import ChainlintError


class DataError(ChainlintError):
    """Data that cannot be profiled; the message names the file (and line where known)."""
