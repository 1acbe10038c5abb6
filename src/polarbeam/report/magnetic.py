"""The tables of a magnetic campaign: series.csv and properties.csv in magnetic columns.

A magnetic campaign is fitted with the electric machinery (polarbeam.separation.magnetic); its
tables lead with χ_eff (series) and χ_dia and the moment (properties) in CGS-emu cm³/mol and Bohr
magnetons, and leave out the electric stand-in columns (α in Å³, μ in D, voltages), which would
only mislead.  Reads result tables; computes nothing.
"""

from __future__ import annotations

import math

import pandas as pd

from polarbeam._util.cautions import MAGNETIC_CAUTIONS
from polarbeam.quantities import value_error_text
from polarbeam.uncertain import variance_budget

__all__ = [
    "MAGNETIC_PROPERTY_COLUMNS",
    "MAGNETIC_SERIES_COLUMNS",
    "magnetic_compound_markdown",
    "magnetic_markdown_lines",
    "magnetic_summary",
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
        "χ_eff = χ_dia + C/T, C = 0.12505 m² cm³ K/mol (m in μ_B); series.csv and "
        "properties.csv hold the same columns.",
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


# results.json ------------------------------------------------------------------------------------
#: the electric blocks of a compound's / a series' summary() that hold the fit's stand-ins
_COMPOUND_STAND_INS = (
    "alpha",
    "alpha_budget",
    "dipole",
    "dipole_budget",
    "mean_square_dipole_C2m2",
    "debye_fit",
    "alpha_mu2_correlation",
    "alpha_eff_correlation",
)


def _get(d: dict, key: str):
    v = d.get(key)
    return v if v is None or not isinstance(v, float) or math.isfinite(v) else None


def _series_summary(s, d: dict) -> dict:
    out = {k: v for k, v in d.items() if k not in ("alpha_eff", "budget", "points")}
    out["chi_eff"] = {
        "cm3_mol": _get(s.extra, "chi_eff_cm3_mol"),
        "err_cm3_mol": _get(s.extra, "chi_eff_err_cm3_mol"),
        "m3_mol": _get(s.extra, "chi_eff_m3_mol"),
        "err_m3_mol": _get(s.extra, "chi_eff_err_m3_mol"),
    }
    out["chi_eff_budget"] = d.get("budget", {})
    out["points"] = [
        {("current_A" if k == "voltage_V" else k): v for k, v in p.items()}
        for p in d.get("points", [])
    ]
    return out


def _compound_summary(c, d: dict) -> dict:
    if c.status == "failed":
        return {k: v for k, v in d.items() if k not in _COMPOUND_STAND_INS}
    e = c.extra
    lo, hi = _get(e, "moment_lo_muB"), _get(e, "moment_hi_muB")
    out = {k: v for k, v in d.items() if k not in (*_COMPOUND_STAND_INS, "series")}
    out.update(
        {
            "chi_dia": {
                "cm3_mol": _get(e, "chi_dia_cm3_mol"),
                "err_cm3_mol": _get(e, "chi_dia_err_cm3_mol"),
                "m3_mol": _get(e, "chi_dia_m3_mol"),
                "err_m3_mol": _get(e, "chi_dia_err_m3_mol"),
            },
            "chi_dia_budget": d.get("alpha_budget", {}),
            "moment": {
                "muB": _get(e, "moment_muB"),
                "err_muB": _get(e, "moment_err_muB"),
                "upper_muB": _get(e, "moment_upper_muB"),
                "interval_muB": [lo, hi] if lo is not None and hi is not None else None,
                "interval_cl": c.dipole_cl[0] if c.dipole_cl else None,
                "limit_cl": c.dipole_cl[1] if c.dipole_cl else None,
                "method": "unified intervals for <m^2> >= 0 (Feldman-Cousins 1998)",
            },
            "moment_budget": variance_budget(c.dipole if c.dipole is not None else c.mu2),
            "curie_constant": {
                "cm3_K_mol": _get(e, "curie_constant_cm3_K_mol"),
                "err_cm3_K_mol": _get(e, "curie_constant_err_cm3_K_mol"),
            },
            "curie_fit": d.get("debye_fit"),
            "chi_dia_curie_correlation": d.get("alpha_mu2_correlation"),
            "chi_eff_correlation": d.get("alpha_eff_correlation"),
            "series": [
                _series_summary(s, sd) for s, sd in zip(c.series, d.get("series", []), strict=True)
            ],
        }
    )
    return out


def magnetic_summary(result) -> dict:
    """``results.json`` of a magnetic campaign: ``result.summary()`` with each compound's α/μ
    stand-in blocks replaced by χ_dia (cm³/mol and m³/mol), the moment (μ_B, with the interval
    fields of a dipole), the Curie constant and, per series, χ_eff; point drives are
    ``current_A``; the cautions are the magnet's.  Budgets and correlations are shares and
    coefficients (unit-free), kept."""
    d = result.summary()
    d["compounds"] = [
        _compound_summary(c, cd) for c, cd in zip(result.compounds, d["compounds"], strict=True)
    ]
    d["cautions"] = list(MAGNETIC_CAUTIONS)
    return d


# report.md ---------------------------------------------------------------------------------------
def _ve(v, e, scale: float = 1.0) -> str:
    if v is None or e is None:
        return "—"
    return value_error_text(v * scale, e * scale)


def magnetic_compound_markdown(c, escape, obs: str) -> list[str]:
    """The per-compound Markdown section of a magnetic campaign (χ in 10⁻⁶ cm³/mol, μ_B, A)."""
    lines = ["", f"## {escape(c.compound)}", ""]
    if c.status == "failed":
        return [*lines, f"**failed:** {escape(c.message)}"]
    lines += [
        f"mass {c.mass_u:.4f} u · method: {c.method}",
        "",
        "| T (K) | points | χ_eff (10⁻⁶ cm³/mol) | χ²/ν | velocity (m/s) |",
        "|---|---|---|---|---|",
    ]
    for s in c.series:
        x = s.extra
        lines.append(
            f"| {value_error_text(s.temperature_K, s.temperature_err_K)} | {s.n_points} | "
            f"{_ve(x.get('chi_eff_cm3_mol'), x.get('chi_eff_err_cm3_mol'), 1e6)} | "
            f"{s.reduced_chi2:.2f} | {value_error_text(s.velocity_m_s, s.velocity_err_m_s)} ± σ "
            f"{s.velocity_spread_m_s:g} |"
        )
    for s in c.series:
        lines += [
            "",
            f"Fit at {s.temperature_K:g} K — {obs} versus current:",
            "",
            "| I (A) | measured | error | model | residual/σ |",
            "|---|---|---|---|---|",
        ]
        for i, y, e, m in zip(s.voltages, s.values, s.errors, s.model, strict=True):
            lines.append(f"| {i:g} | {y:.5g} | {e:.2g} | {m:.5g} | {(y - m) / e:+.2f} |")
    e = c.extra
    if e.get("chi_dia_cm3_mol") is not None:
        lines += ["", f"**χ_dia = {_chi_text(e)} ×10⁻⁶ cm³/mol**"]
    if e.get("moment_muB") is not None:
        lines += [f"**moment = {_moment_text(e)} μ_B**"]
    elif e.get("moment_upper_muB") is not None:
        lines += [f"**moment < {e['moment_upper_muB']:.3g} μ_B** (no significant moment)"]
    if e.get("moment_lo_muB") is not None and c.dipole_cl is not None:
        lines += [
            "",
            f"{c.dipole_cl[0]:.1%} interval for the moment: [{e['moment_lo_muB']:.3g}, "
            f"{e['moment_hi_muB']:.3g}] μ_B (unified intervals, Feldman–Cousins)",
        ]
    if e.get("curie_constant_cm3_K_mol") is not None:
        lines += [
            "",
            "Curie constant C = "
            f"{_ve(e['curie_constant_cm3_K_mol'], e['curie_constant_err_cm3_K_mol'])} cm³ K/mol",
        ]
    for what, target in (
        ("χ_dia" if c.alpha is not None else "χ_eff (first series)", _chi_target(c)),
        ("the moment" if c.dipole is not None else "C (⟨m²⟩)", _moment_target(c)),
    ):
        budget = variance_budget(target)
        if budget:
            lines += ["", f"Uncertainty budget of {what} (share of variance):", ""]
            lines += ["| input | share |", "|---|---|"]
            lines += [f"| {escape(k)} | {v:.1%} |" for k, v in budget.items()]
    if c.warnings:
        lines += ["", "Warnings:", ""] + [f"- {escape(w)}" for w in c.warnings]
    return lines


def _chi_target(c):
    """The uncertain number behind χ_dia (or the first χ_eff): its budget shares are the χ ones."""
    return c.alpha if c.alpha is not None else (c.series[0].alpha_eff if c.series else None)


def _moment_target(c):
    return c.dipole if c.dipole is not None else c.mu2 if c.alpha is not None else None


MAGNETIC_METHOD_LINES = (
    "χ_eff = χ_dia + C/T with C = N_A μ0 m²/(3k) = 0.12505 m² cm³ K/mol (m in μ_B; Curie law, "
    "weak field, thermal orientations); the force on a molecule is (χ_m/μ0 + m²/(3kT)) B ∂B/∂x "
    "with B ∂B/∂x = field factor × current² (docs/magnetic.md).",
    "Errors are 1σ standard uncertainties propagated linearly from every stated input and "
    "the fit covariances; shared instrument inputs are correlated across series.",
)
