"""Field computation."""
