"""planning stage."""
