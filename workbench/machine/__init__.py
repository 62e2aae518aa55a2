"""machine layer."""
