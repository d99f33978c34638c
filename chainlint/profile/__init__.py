"""The profile store: column statistics gathered from sample data, committed beside the code."""
