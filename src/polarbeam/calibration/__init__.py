"""calibration stage."""
