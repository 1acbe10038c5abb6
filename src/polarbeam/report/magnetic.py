"""The tables of a magnetic campaign: series.csv and properties.csv in magnetic columns.

A magnetic campaign is fitted with the electric machinery (polarbeam.separation.magnetic); its
tables lead with χ_eff (series) and χ_dia and the moment (properties) in CGS-emu cm³/mol and Bohr
magnetons, and leave out the electric stand-in columns (α in Å³, μ in D, voltages), which would
only mislead.  Reads result tables; computes nothing.
"""

from __future__ import annotations

import pandas as pd

__all__ = ["MAGNETIC_PROPERTY_COLUMNS", "MAGNETIC_SERIES_COLUMNS", "magnetic_tables"]

MAGNETIC_SERIES_COLUMNS = (
    "compound",
    "temperature_K",
    "n_points",
    "chi_eff_cm3_mol",
    "chi_eff_err_cm3_mol",
    "reduced_chi2",
)
MAGNETIC_PROPERTY_COLUMNS = (
    "compound",
    "chi_dia_cm3_mol",
    "chi_dia_err_cm3_mol",
    "moment_muB",
    "moment_err_muB",
    "moment_upper_muB",
    "moment_lo_muB",
    "moment_hi_muB",
    "status",
    "message",
)
_ELECTRIC = ("alpha_", "dipole_", "max_abs_voltage_V", "relative_visibility_at_max_V", "debye_")


def _drop(df: pd.DataFrame) -> pd.DataFrame:
    keep = [c for c in df.columns if not c.startswith(_ELECTRIC)]
    return df[keep].copy()


def magnetic_tables(series: pd.DataFrame, properties: pd.DataFrame):
    """(series, properties) without the electric stand-in columns."""
    props = properties.copy()
    if "debye_chi2" in props.columns:
        props = props.rename(columns={"debye_chi2": "curie_chi2", "debye_ndof": "curie_ndof"})
    return _drop(series), _drop(props)
