"""The tables of a magnetic campaign: series.csv and properties.csv in magnetic columns.

A magnetic campaign is fitted with the electric machinery (polarbeam.separation.magnetic); its
tables lead with χ_eff (series) and χ_dia and the moment (properties) in CGS-emu cm³/mol and Bohr
magnetons, and leave out the electric stand-in columns (α in Å³, μ in D, voltages), which would
only mislead.  Reads result tables; computes nothing.
"""

from __future__ import annotations

import pandas as pd

from polarbeam.quantities import value_error_text

__all__ = [
    "MAGNETIC_PROPERTY_COLUMNS",
    "MAGNETIC_SERIES_COLUMNS",
    "magnetic_markdown_lines",
    "magnetic_tables",
    "magnetic_terminal_lines",
]

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


def _moment_text(e: dict) -> str:
    if e.get("moment_muB") is not None:
        return value_error_text(e["moment_muB"], e["moment_err_muB"])
    if e.get("moment_upper_muB") is not None:
        return f"< {e['moment_upper_muB']:.3g}"
    return "—"


def _chi_text(e: dict) -> str:
    if e.get("chi_dia_cm3_mol") is None:
        return "—"
    return value_error_text(e["chi_dia_cm3_mol"] * 1e6, e["chi_dia_err_cm3_mol"] * 1e6)


def magnetic_terminal_lines(result, safe) -> list[str]:
    """The terminal table of a magnetic campaign (χ_dia in 10⁻⁶ cm³/mol, moment in μ_B)."""
    head = f"{'compound':<24} {'χ_dia (1e-6 cm³/mol)':>22} {'m (μ_B)':>16}  status"
    out = [safe(result.title), head, "-" * len(head)]
    for c in result.compounds:
        name = safe(c.compound)
        name = name if len(name) <= 24 else name[:23] + "…"
        out.append(
            f"{name:<24} {_chi_text(c.extra):>22} {_moment_text(c.extra):>16}  {safe(c.status)}"
        )
    return out


def magnetic_markdown_lines(result, escape) -> list[str]:
    """The Markdown summary of a magnetic campaign."""
    lines = [
        "## Magnetic summary",
        "",
        'Electromagnet (`[deflector] field = "magnetic"`): χ_dia and the effective moment from '
        "χ_eff = χ_dia + C/T, C = 0.12505 m² cm³ K/mol (m in μ_B). The α/μ columns elsewhere in "
        "this report are the fit's stand-ins (χ_m/μ0 in 10¹² J/T², m in 10⁶ J/T), not "
        "polarizabilities; series.csv and properties.csv hold the magnetic columns.",
        "",
        "| compound | χ_dia (10⁻⁶ cm³/mol) | m (μ_B) | status | message |",
        "|---|---|---|---|---|",
    ]
    for c in result.compounds:
        lines.append(
            f"| {escape(c.compound)} | {_chi_text(c.extra)} | {_moment_text(c.extra)} | "
            f"{escape(c.status)} | {escape(c.message)} |"
        )
    return [*lines, ""]
