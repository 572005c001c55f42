"""Source models."""
