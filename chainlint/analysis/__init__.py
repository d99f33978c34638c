"""Analysis results (plain immutable data) and the driver that produces them per file."""
