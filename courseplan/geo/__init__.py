"""geo layer."""
