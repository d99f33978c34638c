"""Binding: which profile describes the frame a chain filters."""
