"""beam stage."""
