"""The standing light wave as a grating: eikonal phase φ0 and mean absorbed photon number n0.

A Gaussian beam of power P (waists w_y vertical, w_z along the molecular beam) is retro-reflected
onto itself. Each running wave has the peak intensity I_run = 2P/(π w_y w_z); the standing wave
has the local intensity I(x) = 4 I_run cos²(kx) e^{−2y²/w_y² − 2z²/w_z²} (k = 2π/λ_L, period
d = λ_L/2). A molecule crossing at y = 0 with velocity v sees z = vt and

* the optical dipole potential U = −Re α I/(2ε₀c): the eikonal phase −(1/ħ)∫U dt is
  φ(x) = φ0 cos²(kx) with φ0 = 4 Re α P/(√(2π) ε₀ c ħ w_y v) = 4√(2π) Re α P/(ε₀ c h w_y v);
* the absorption rate σ_abs I/(ħω): n(x) = n0 cos²(kx) with n0 = 8 σ_abs λ_L P/(√(2π) h c w_y v);

both ∝ P/(v w_y) because ∫e^{−2v²t²/w_z²} dt = √(π/2) w_z/v cancels w_z. For a weak absorber
σ_abs = k Im α/ε₀, hence n0/φ0 = 2 Im α/Re α. Derived in docs/visibility.md (derived here).
"""

from __future__ import annotations

import math

import numpy as np
from scipy import constants as _sc

__all__ = [
    "absorption_cross_section",
    "mean_absorbed_photons",
    "peak_fluence_time_integral",
    "phase_amplitude",
]

_SQRT_2PI = math.sqrt(2.0 * math.pi)


def peak_fluence_time_integral(power, waist, velocity):
    """∫ I dt at an antinode on the beam axis (J/m²): 8 P/(√(2π) w_y v)."""
    return 8.0 * np.asarray(power, dtype=float) / (_SQRT_2PI * waist * np.asarray(velocity))


def phase_amplitude(alpha_re, power, waist, velocity):
    """Eikonal phase amplitude φ0 = Re α ∫I dt/(2 ε₀ c ħ) (rad) at an antinode.

    Parameters
    ----------
    alpha_re
        Real part of the polarizability at the laser wavelength (SI, C·m²/V).
    power
        Power of the incident beam at the molecules (W); the retro-reflected beam has the same.
    waist
        Vertical 1/e² intensity waist w_y (m).
    velocity
        Forward velocity of the molecule (m/s).
    """
    return (
        np.asarray(alpha_re)
        * peak_fluence_time_integral(power, waist, velocity)
        / (2.0 * _sc.epsilon_0 * _sc.c * _sc.hbar)
    )


def mean_absorbed_photons(sigma_abs, power, waist, velocity, wavelength):
    """Mean number of photons absorbed at an antinode, n0 = σ_abs ∫I dt/(ħω)."""
    photon = _sc.h * _sc.c / wavelength
    return np.asarray(sigma_abs) * peak_fluence_time_integral(power, waist, velocity) / photon


def absorption_cross_section(alpha_im, wavelength):
    """σ_abs = k Im α/ε₀ (m²) of a small absorber (dipole absorbing ½ω Im α |E|²)."""
    return 2.0 * math.pi / wavelength * np.asarray(alpha_im) / _sc.epsilon_0
