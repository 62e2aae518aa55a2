"""ui layer."""
