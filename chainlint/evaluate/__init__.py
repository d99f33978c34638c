"""Evaluation of chainlint's own predicate IR on data (never the user's code)."""
