"""The error every data reader raises."""


class DataError(Exception):
    """Data that cannot be profiled; the message names the file (and line where known)."""
