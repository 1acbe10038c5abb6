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
    "BOLTZMANN",
    "CM2",
    "CONSTANTS",
    "DEBYE_SI",
    "EPSILON0",
    "HBAR",
    "PLANCK",
    "Constant",
    "alpha_a3_from_si",
    "alpha_au_from_si",
    "alpha_si_from_a3",
    "alpha_si_from_au",
    "debye_from_si",
    "langevin_debye_si",
    "si_from_debye",
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
