"""render layer."""
