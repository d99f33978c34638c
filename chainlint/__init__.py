"""chainlint: keep every chain of pandas row filters in a cheap, result-preserving order."""

__version__ = "0.1.0"
