"""instrument stage."""
