"""Estimation: selectivity of predicates from a profile, and the cost of running steps."""
