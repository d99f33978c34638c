"""Planning: the cheapest order of a chain's movable steps, never across a barrier."""
