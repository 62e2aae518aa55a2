"""runs layer."""
