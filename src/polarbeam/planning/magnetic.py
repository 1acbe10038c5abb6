"""What-if for magnetic campaigns: the precision of χ_eff, χ_dia and the moment before beam time.

Small phases (or shifts) are linear in the force constant: y = a_eff·K·I² + offset with
K = (coupling/mass)·⟨1/v²⟩ for a uniform magnet, so a ladder of currents I_k with point error σ
gives σ²(a_eff) = σ² / Σ (K I_k² − mean)² (the Fisher information of (a_eff, offset)), plus the
shared relative scale error (field factor, velocity, mass).  The series errors are carried through
the Curie line χ_eff = χ_dia + C m²/T with :func:`polarbeam.planning.precision.debye_precision`
(the electric Debye-line propagation with χ in 10⁻⁶ cm³/mol in place of Å³), and the moment is
stated as the analysis would: a value ± error when m²/σ(m²) reaches ``significance``, else the
expected upper limit.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from polarbeam.constants import (
    ANGSTROM3_SI,
    BOLTZMANN,
    CURIE_CONSTANT_CGS,
    MAGNETIC_FIT_SCALE,
    chi_cgs_from_force_constant,
    si_from_debye,
)
from polarbeam.planning.precision import debye_precision
from polarbeam.separation.debye import bounded_upper_limit

__all__ = ["MagneticPlan", "magnetic_plan"]

#: the slope unit debye_precision converts ⟨μ²⟩ (D²) with: β (Å³ K) = ⟨μ²⟩/(3k) in those units
_D2_PER_A3K = 3.0 * BOLTZMANN * ANGSTROM3_SI / si_from_debye(1.0) ** 2


@dataclass(frozen=True)
class MagneticPlan:
    """Predicted figures of one compound (χ in cm³/mol, moments in μ_B)."""

    temperatures_K: tuple[float, ...]
    chi_eff_cm3_mol: tuple[float, ...]
    sigma_chi_eff_cm3_mol: tuple[float, ...]
    sigma_chi_dia_cm3_mol: float
    sigma_moment_muB: float  # NaN when no significant moment is expected
    moment_limit_muB: float  # NaN when a value is expected

    def summary(self) -> dict:
        return {k: getattr(self, k) for k in self.__dataclass_fields__}


def magnetic_plan(
    coupling_per_mass: float,
    currents_A: Sequence[float],
    point_err: float,
    mean_inverse_v2: float,
    chi_dia_cm3_mol: float,
    moment_muB: float,
    temperatures_K: Sequence[float],
    *,
    temperature_err_K: float = 1.0,
    scale_rel_err: float = 0.01,
    significance: float = 3.0,
    limit_cl: float = 0.95,
) -> MagneticPlan:
    """Expected precision of a magnetic temperature series.

    ``coupling_per_mass`` is the analysis' coupling/mass (observable per force constant per A²
    per ⟨1/v²⟩, in the fits' internal unit of ``polarbeam.extraction.context``), ``currents_A``
    the ladder (|I|), ``point_err`` the error of each point, ``mean_inverse_v2`` ⟨1/v²⟩ (s²/m²).
    """
    i2 = np.asarray(currents_A, dtype=float) ** 2
    k = coupling_per_mass * mean_inverse_v2 * i2
    sxx = float(np.sum((k - k.mean()) ** 2))
    if not sxx > 0:
        raise ValueError("magnetic_plan: expected at least two different currents")
    sigma_fit = point_err / math.sqrt(sxx)  # in the fits' internal force-constant unit
    to_cgs = float(chi_cgs_from_force_constant(MAGNETIC_FIT_SCALE))  # cm³/mol per internal unit
    t = np.asarray(temperatures_K, dtype=float)
    curie = CURIE_CONSTANT_CGS * moment_muB**2
    chi = chi_dia_cm3_mol + curie / t
    u = 1e6  # work in 10⁻⁶ cm³/mol (the "Å³" slot of the Debye propagation)
    sig = np.full_like(t, sigma_fit * to_cgs * u)
    beta = curie * u  # slope in 10⁻⁶ cm³ K/mol
    prec = debye_precision(
        chi * u, sig**2, sig**2, scale_rel_err**2, t, temperature_err_K, beta * _D2_PER_A3K
    )
    sigma_beta = prec.sigma_mu2_D2 / _D2_PER_A3K
    per_m2 = CURIE_CONSTANT_CGS * u  # slope per μ_B²
    m2, s_m2 = moment_muB**2, sigma_beta / per_m2
    if m2 > 0 and m2 / s_m2 >= significance:
        s_m, lim = s_m2 / (2.0 * moment_muB), math.nan
    else:
        s_m, lim = math.nan, math.sqrt(max(bounded_upper_limit(m2, s_m2, limit_cl), 0.0))
    sig_total = np.sqrt(sig**2 + (scale_rel_err * chi * u) ** 2) / u
    return MagneticPlan(
        tuple(float(x) for x in t),
        tuple(float(x) for x in chi),
        tuple(float(x) for x in sig_total),
        prec.sigma_alpha_A3 / u,
        float(s_m),
        float(lim),
    )
