"""Measuring chains on data: the written against the planned order, in pandas."""
