"""plots layer."""
