"""Physical constants and unit conversions (CODATA values via :mod:`scipy.constants`).

Everything inside polarbeam is SI.  Polarizabilities are carried in C·m²/V; the polarizability
*volume* in Å³ is ``alpha / (4 pi eps0) * 1e30``; the atomic unit of polarizability is
``e² a0² / Eh`` (= 4 pi eps0 a0³).  Dipole moments are carried in C·m; 1 debye = 1e-21 / c C·m.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import constants as _sc

__all__ = [
    "AMU",
    "ANGSTROM3_SI",
    "AU_POLARIZABILITY_SI",
    "AVOGADRO",
    "BOHR_MAGNETON",
    "BOLTZMANN",
    "CGS_MOLAR_SUSCEPTIBILITY_SI",
    "CM2",
    "CONSTANTS",
    "CURIE_CONSTANT_CGS",
    "DEBYE_SI",
    "EPSILON0",
    "HBAR",
    "MAGNETIC_FIT_SCALE",
    "MU0",
    "PLANCK",
    "Constant",
    "alpha_a3_from_si",
    "alpha_au_from_si",
    "alpha_si_from_a3",
    "alpha_si_from_au",
    "chi_cgs_from_force_constant",
    "chi_cgs_from_molecular_si",
    "chi_molecular_si_from_cgs",
    "curie_constant_cgs",
    "debye_from_si",
    "langevin_debye_si",
    "muB_from_si",
    "si_from_debye",
    "si_from_muB",
]


@dataclass(frozen=True)
class Constant:
    """A constant as data: value in SI, its unit and where it comes from."""

    name: str
    value: float
    unit: str
    source: str


_CODATA = f"CODATA via scipy.constants {_sc.__name__} (scipy)"

EPSILON0 = _sc.epsilon_0
BOLTZMANN = _sc.k
HBAR = _sc.hbar
PLANCK = _sc.h
AMU = _sc.physical_constants["atomic mass constant"][0]
BOHR = _sc.physical_constants["Bohr radius"][0]
#: 1 Å³ of polarizability volume expressed as a polarizability in C·m²/V.
ANGSTROM3_SI = 4.0 * np.pi * EPSILON0 * 1e-30
#: Atomic unit of electric polarizability, C·m²/V.
AU_POLARIZABILITY_SI = _sc.physical_constants["atomic unit of electric polarizability"][0]
#: 1 debye in C·m (10⁻²¹/c by definition of the unit).
DEBYE_SI = 1e-21 / _sc.c

CONSTANTS = {
    c.name: c
    for c in (
        Constant("epsilon_0", EPSILON0, "F/m", _CODATA),
        Constant("k_B", BOLTZMANN, "J/K", _CODATA),
        Constant("hbar", HBAR, "J s", _CODATA),
        Constant("h", PLANCK, "J s", _CODATA),
        Constant("atomic mass constant", AMU, "kg", _CODATA),
        Constant("Bohr radius", BOHR, "m", _CODATA),
        Constant("atomic unit of polarizability", AU_POLARIZABILITY_SI, "C m^2/V", _CODATA),
        Constant("debye", DEBYE_SI, "C m", "definition: 1e-21/c C m"),
    )
}


def alpha_si_from_a3(a3):
    """Polarizability volume (Å³) → polarizability (C·m²/V)."""
    return a3 * ANGSTROM3_SI


def alpha_a3_from_si(si):
    """Polarizability (C·m²/V) → polarizability volume (Å³)."""
    return si / ANGSTROM3_SI


def alpha_au_from_si(si):
    """Polarizability (C·m²/V) → atomic units (bohr³ as a volume)."""
    return si / AU_POLARIZABILITY_SI


def alpha_si_from_au(au):
    """Atomic units of polarizability → C·m²/V."""
    return au * AU_POLARIZABILITY_SI


def debye_from_si(mu_si):
    """Dipole moment C·m → debye."""
    return mu_si / DEBYE_SI


def si_from_debye(mu_d):
    """Dipole moment debye → C·m."""
    return mu_d * DEBYE_SI


def langevin_debye_si(mu_si, temperature_k):
    """Orientational (Langevin–Debye) polarizability ⟨μ²⟩/(3kT) in C·m²/V, high-T limit."""
    return mu_si**2 / (3.0 * BOLTZMANN * temperature_k)


#: One cm² in m² (cross-sections are reported in cm², the unit of the trade).
CM2 = 1e-4


# Magnetism (polarbeam.beam.magnetic; docs/magnetic.md).  Molar susceptibilities are reported in
# the chemist's CGS-emu unit cm³/mol: a rationalised SI molar susceptibility (m³/mol) is 4π·10⁻⁶
# times the CGS-emu number (χ_SI = 4π χ_cgs for the dimensionless volume susceptibility, and
# 1 cm³ = 10⁻⁶ m³).
MU0 = _sc.mu_0
AVOGADRO = _sc.N_A
BOHR_MAGNETON = _sc.physical_constants["Bohr magneton"][0]
#: 1 cm³/mol (CGS-emu molar susceptibility) in SI m³/mol.
CGS_MOLAR_SUSCEPTIBILITY_SI = 4.0 * np.pi * 1e-6
#: Curie constant per μ_B² of effective moment, N_A μ0 μ_B²/(3k), in CGS-emu cm³ K/mol (≈ 0.12505).
CURIE_CONSTANT_CGS = (
    AVOGADRO * MU0 * BOHR_MAGNETON**2 / (3.0 * BOLTZMANN) / (CGS_MOLAR_SUSCEPTIBILITY_SI)
)
#: The magnetic fits run on the electric machinery with the force constant in units of 10¹² J/T²
#: (and the field factor in 10⁻¹² T²/(m A²)): magnetic force constants (10⁻²⁷…10⁻²⁵ J/T²) then
#: fall at the numerical scale of polarizabilities (10⁻⁴⁰…10⁻³⁷ C·m²/V) for which the electric
#: first guesses and steps are made; the moment is then in 10⁶ J/T.  The product a·g is unchanged.
MAGNETIC_FIT_SCALE = 1e12
CONSTANTS.update(
    {
        c.name: c
        for c in (
            Constant("mu_0", MU0, "N/A^2", _CODATA),
            Constant("N_A", AVOGADRO, "1/mol", _CODATA),
            Constant("Bohr magneton", BOHR_MAGNETON, "J/T", _CODATA),
        )
    }
)


def chi_molecular_si_from_cgs(chi_cgs):
    """Molar susceptibility (CGS-emu cm³/mol) → SI susceptibility per molecule (m³)."""
    return chi_cgs * CGS_MOLAR_SUSCEPTIBILITY_SI / AVOGADRO


def chi_cgs_from_molecular_si(chi_si):
    """SI susceptibility per molecule (m³) → molar susceptibility (CGS-emu cm³/mol)."""
    return chi_si * AVOGADRO / CGS_MOLAR_SUSCEPTIBILITY_SI


def chi_cgs_from_force_constant(a_si):
    """The magnetic force constant χ_m/μ0 (J/T², the role α plays for electric fields) →
    molar susceptibility in CGS-emu cm³/mol."""
    return chi_cgs_from_molecular_si(a_si * MU0)


def muB_from_si(m_si):
    """Magnetic moment J/T → Bohr magnetons."""
    return m_si / BOHR_MAGNETON


def si_from_muB(m_muB):
    """Magnetic moment in Bohr magnetons → J/T."""
    return m_muB * BOHR_MAGNETON


def curie_constant_cgs(mu_eff_muB):
    """Curie constant C = N_A μ0 m²/(3k) in cm³ K/mol for an effective moment in μ_B."""
    return CURIE_CONSTANT_CGS * mu_eff_muB**2
