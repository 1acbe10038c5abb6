"""Calibration: the field factor from reference compounds of known α (and μ), fitted with the full
covariance of their series and applied to the other compounds.
"""

from polarbeam.calibration.calibrate import (
    Calibration,
    CalibrationOutcome,
    ReferenceCalibration,
    ReferenceValue,
    calibrate_campaign,
    calibration_required,
    gls_log_mean,
    known_alpha_eff,
    load_reference_tables,
    reference_tables_dir,
    reference_values,
)

__all__ = [
    "Calibration",
    "CalibrationOutcome",
    "ReferenceCalibration",
    "ReferenceValue",
    "calibrate_campaign",
    "calibration_required",
    "gls_log_mean",
    "known_alpha_eff",
    "load_reference_tables",
    "reference_tables_dir",
    "reference_values",
]
