"""comparison stage."""
