"""Max-plus algebra of timed event graphs."""
