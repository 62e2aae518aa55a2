"""angle layer."""
