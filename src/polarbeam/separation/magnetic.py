"""Magnetic results from the electric machinery: χ_eff, χ_dia and the effective moment.

A magnetic campaign is fitted exactly as an electric one (polarbeam.extraction.series for each
series, the Debye line and the unified intervals of polarbeam.separation for the compound), with
α ↔ χ_m/μ0 and μ ↔ m (polarbeam.beam.magnetic).  This module maps the fitted numbers to the
chemist's units and rewrites the statements: χ_eff and χ_dia in CGS-emu cm³/mol (SI m³/mol in
results.json), the moment in Bohr magnetons with the same bounded-interval rules as dipoles, and
the Zeeman-regime check m·B/kT (B = field_per_ampere × the largest |I|) in place of μE/kT.
A negative χ_eff is a diamagnet, the normal case: it is not a warning.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
from scipy import stats

from polarbeam.constants import (
    BOLTZMANN,
    CGS_MOLAR_SUSCEPTIBILITY_SI,
    CURIE_CONSTANT_CGS,
    MAGNETIC_FIT_SCALE,
    chi_cgs_from_force_constant,
    muB_from_si,
)
from polarbeam.results.objects import CompoundResult, SeriesResult

__all__ = [
    "MAGNETIC_PROPERTY_KEYS",
    "MAGNETIC_SERIES_KEYS",
    "magnetic_compound",
    "magnetic_series",
    "zeeman_ratio",
]

MAGNETIC_SERIES_KEYS = ("chi_eff_cm3_mol", "chi_eff_err_cm3_mol")
MAGNETIC_PROPERTY_KEYS = (
    "chi_dia_cm3_mol",
    "chi_dia_err_cm3_mol",
    "moment_muB",
    "moment_err_muB",
    "moment_upper_muB",
    "moment_lo_muB",
    "moment_hi_muB",
)
#: the series warnings of the electric fit that also hold for a magnet (fit quality, contrast)
_KEEP = ("reduced χ²", "washes the fringe")


_MOMENT_SCALE = math.sqrt(MAGNETIC_FIT_SCALE)


def _cgs(x: float) -> float:
    """The fitted stand-in α (10¹² J/T² units) → χ in cm³/mol."""
    return float(chi_cgs_from_force_constant(x * MAGNETIC_FIT_SCALE))


def _muB(m: float) -> float:
    """The fitted stand-in μ (10⁶ J/T units) → μ_B."""
    return float(muB_from_si(m * _MOMENT_SCALE))


def _si_molar(x_cgs: float) -> float:
    return x_cgs * CGS_MOLAR_SUSCEPTIBILITY_SI


def magnetic_series(s: SeriesResult) -> SeriesResult:
    """A series result with χ_eff (cm³/mol; m³/mol SI) added and the electric sign warnings
    dropped (a negative χ_eff is a diamagnet)."""
    a = s.alpha_eff
    chi, err = _cgs(a.nominal_value), _cgs(a.std_dev)
    extra = {
        **s.extra,
        "chi_eff_cm3_mol": chi,
        "chi_eff_err_cm3_mol": err,
        "chi_eff_m3_mol": _si_molar(chi),
        "chi_eff_err_m3_mol": _si_molar(err),
        "max_abs_current_A": float(np.max(np.abs(s.voltages))),
    }
    warnings = tuple(w for w in s.warnings if any(k in w for k in _KEEP))
    return dataclasses.replace(s, extra=extra, warnings=warnings)


def zeeman_ratio(moment_si: float, field_per_ampere, results, temperatures) -> float | None:
    """m·B/kT at the largest |I| and the lowest temperature (None without field_per_ampere)."""
    if not field_per_ampere or not moment_si:
        return None
    imax = max(float(np.max(np.abs(r.voltages))) for r in results)
    return moment_si * field_per_ampere * imax / (BOLTZMANN * min(temperatures))


def magnetic_compound(result: CompoundResult, field_per_ampere, settings) -> CompoundResult:
    """The compound result in magnetic terms (columns of properties.csv, statement, warnings)."""
    if result.status == "failed":
        return result
    series = tuple(magnetic_series(s) for s in result.series)
    a, d = result.alpha, result.dipole
    cols: dict[str, float | None] = dict.fromkeys(MAGNETIC_PROPERTY_KEYS)
    messages: list[str] = []
    if a is not None:
        cols["chi_dia_cm3_mol"] = _cgs(a.nominal_value)
        cols["chi_dia_err_cm3_mol"] = _cgs(a.std_dev)
        messages.append(
            f"χ_dia = {cols['chi_dia_cm3_mol'] * 1e6:.4g} ± "
            f"{cols['chi_dia_err_cm3_mol'] * 1e6:.2g} ×10⁻⁶ cm³/mol"
        )
    elif len(series) == 1:
        messages.append(
            "single temperature: χ_dia and the moment cannot be separated (χ_eff is in series.csv)"
        )
    if d is not None:
        cols["moment_muB"] = _muB(d.nominal_value)
        cols["moment_err_muB"] = _muB(d.std_dev)
        messages.append(
            f"moment = {cols['moment_muB']:.4g} ± {cols['moment_err_muB']:.2g} μ_B "
            f"(C = {CURIE_CONSTANT_CGS * cols['moment_muB'] ** 2:.4g} cm³ K/mol)"
        )
    if result.dipole_upper_si is not None:
        cols["moment_upper_muB"] = _muB(result.dipole_upper_si)
        cl = result.dipole_cl[1] if result.dipole_cl else settings.upper_limit_cl
        messages.append(
            f"no significant moment: m < {cols['moment_upper_muB']:.3g} μ_B ({cl:.0%} CL)"
        )
    if result.dipole_interval_si:
        lo, hi = result.dipole_interval_si
        cols["moment_lo_muB"] = _muB(lo)
        cols["moment_hi_muB"] = _muB(hi)
    warnings = [w for s in series for w in s.warnings]
    if result.debye_ndof and result.debye_chi2 is not None and math.isfinite(result.debye_chi2):
        p = float(stats.chi2.sf(result.debye_chi2, result.debye_ndof))
        if p < 1e-3:
            warnings.append(
                f"Curie fit χ² = {result.debye_chi2:.1f} for {result.debye_ndof} dof "
                f"(p = {p:.1e}): χ_eff does not follow χ_dia + C/T"
            )
    m_fit = d.nominal_value if d is not None else result.dipole_upper_si
    m_si = m_fit * _MOMENT_SCALE if m_fit is not None else 0.0
    temps = [s.temperature_K for s in series]
    x = zeeman_ratio(m_si, field_per_ampere, series, temps) if series else None
    if x is not None and x > settings.orientation_warning:
        warnings.append(
            f"m·B/kT = {x:.2f} at the largest current and {min(temps):g} K: the weak-field "
            "Curie limit is not well satisfied (Brillouin regime; docs/magnetic.md)"
        )
    elif x is None and (d is not None) and not field_per_ampere:
        messages.append("m·B/kT check skipped: state field_per_ampere (|B|/I) to enable it")
    extra = {k: v for k, v in result.extra.items() if k not in ("mu_E_over_kT", "crosscheck")}
    extra.update(cols)
    extra["chi_dia_m3_mol"] = _si_molar(cols["chi_dia_cm3_mol"]) if a is not None else None
    extra["chi_dia_err_m3_mol"] = _si_molar(cols["chi_dia_err_cm3_mol"]) if a is not None else None
    extra["m_B_over_kT"] = x
    mu2 = result.mu2  # the Curie constant C = slope of χ_eff against 1/T (cm³ K/mol)
    extra["curie_constant_cm3_K_mol"] = (
        _cgs(mu2.nominal_value / (3 * BOLTZMANN)) if mu2 is not None else None
    )
    extra["curie_constant_err_cm3_K_mol"] = (
        _cgs(mu2.std_dev / (3 * BOLTZMANN)) if mu2 is not None else None
    )
    return dataclasses.replace(
        result,
        series=series,
        status="warning" if warnings else "ok",
        message="; ".join(messages + warnings) or "ok",
        warnings=tuple(warnings),
        extra=extra,
    )
