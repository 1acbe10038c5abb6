"""extraction stage."""
