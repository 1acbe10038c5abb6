"""batch stage."""
