"""separation stage."""
