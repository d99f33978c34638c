"""chainlint's version: one place, low enough for every stage that records it."""

__version__ = "0.1.0"
