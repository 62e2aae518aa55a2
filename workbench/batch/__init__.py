"""batch layer."""
