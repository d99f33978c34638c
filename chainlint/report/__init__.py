"""Reporters: they only format analysis results, never analyse."""
