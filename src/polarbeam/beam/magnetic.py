"""Magnetic deflection as plain functions: the Curie force constant, the Brillouin and Langevin
regimes, spin-resolved Stern–Gerlach components and superparamagnetic clusters.

A particle of molecular susceptibility χ_m (SI, m³ per molecule) and permanent moment m (J/T) in a
field B(x) feels, in the weak-field limit with thermal orientations (Curie law),

    F = (χ_m/μ0 + m²/(3kT)) · B ∂B/∂x,

the exact counterpart of F = (α + μ²/(3kT)) · E ∂E/∂x: :func:`force_constant` plays the role of
α_eff, so every electric fit (extraction, Debye line, bounded intervals) is reused with
α ↔ χ_m/μ0 and μ ↔ m.  A deflector's field factor is (B·∂B/∂x)/I² (T²/(m A²)) of an electromagnet
driven by a current I.  Diamagnetic molecules have χ_m < 0 and move towards weaker field.

Strong fields or cold beams leave the weak-field limit (x = m B/kT not small):

* a free spin S (g-factor g) with thermal populations has the mean moment
  g μ_B S · B_S(g μ_B S B/kT)
  along B (Brillouin function, :func:`brillouin`);
* a spin that keeps its projection m_S through the magnet splits the beam into 2S + 1
  components with forces −m_S g μ_B ∂B/∂x (:func:`stern_gerlach_components`);
* a superparamagnetic cluster whose moment relaxes inside the magnet has the mean projection
  m · L(m B/kT) (Langevin function, :func:`langevin`): every cluster is pulled towards strong
  field, a one-sided shift (:func:`superparamagnetic_force`).

Sources: Curie law and Brillouin function, C. Kittel, *Introduction to Solid State Physics*,
ch. 11 (Langevin diamagnetism and paramagnetism); Stern–Gerlach splitting, any quantum-mechanics
text (e.g. Sakurai, *Modern Quantum Mechanics*, §1.1); the CGS-emu conversion and
C = N_A μ0 μ_B²/(3k) = 0.12505 cm³ K/mol, O. Kahn, *Molecular Magnetism* (VCH 1993), ch. 1 (the
number is derived here from scipy.constants).
"""

from __future__ import annotations

import math

import numpy as np

from polarbeam.constants import BOHR_MAGNETON, BOLTZMANN, MU0

__all__ = [
    "ELECTRON_G",
    "brillouin",
    "curie_force_constant",
    "force_constant",
    "langevin",
    "mean_moment_brillouin",
    "spin_only_moment",
    "stern_gerlach_components",
    "superparamagnetic_force",
    "zeeman_parameter",
]

#: the free-electron g-factor (CODATA, |g_e|)
ELECTRON_G = 2.00231930436


def curie_force_constant(moment_si, temperature_k):
    """The Curie term m²/(3kT) in J/T² (weak field, thermal orientations)."""
    return np.asarray(moment_si) ** 2 / (3.0 * BOLTZMANN * np.asarray(temperature_k))


def force_constant(chi_molecular_si, moment_si, temperature_k):
    """χ_m/μ0 + m²/(3kT) (J/T²): the mean force per unit B·∂B/∂x."""
    return np.asarray(chi_molecular_si) / MU0 + curie_force_constant(moment_si, temperature_k)


def zeeman_parameter(moment_si, field_t, temperature_k):
    """x = m·B/(kT): the weak-field (Curie) limit holds while x ≪ 1."""
    return np.asarray(moment_si) * np.asarray(field_t) / (BOLTZMANN * np.asarray(temperature_k))


def langevin(x):
    """L(x) = coth x − 1/x (odd; x/3 − x³/45 near 0, → 1 for large x)."""
    x = np.asarray(x, dtype=float)
    out = np.empty_like(x)
    small = np.abs(x) < 1e-3
    xs = x[small]
    out[small] = xs / 3.0 - xs**3 / 45.0 + 2.0 * xs**5 / 945.0
    xl = x[~small]
    out[~small] = 1.0 / np.tanh(xl) - 1.0 / xl
    return out if out.ndim else float(out)


def brillouin(j, x):
    """B_J(x) = (2J+1)/(2J) coth((2J+1)x/(2J)) − 1/(2J) coth(x/(2J)); B_J → L as J → ∞,
    B_J(x) ≈ (J+1)x/(3J) for small x."""
    if not j > 0:
        raise ValueError(f"brillouin: expected J > 0, found {j!r}")
    x = np.asarray(x, dtype=float)
    a = (2.0 * j + 1.0) / (2.0 * j)
    b = 1.0 / (2.0 * j)
    out = np.empty_like(x)
    small = np.abs(x) < 1e-4
    xs = x[small]
    out[small] = (j + 1.0) / (3.0 * j) * xs
    xl = x[~small]
    out[~small] = a / np.tanh(a * xl) - b / np.tanh(b * xl)
    return out if out.ndim else float(out)


def mean_moment_brillouin(spin, g, field_t, temperature_k):
    """Thermal mean moment along B (J/T) of a free spin S: g μ_B S · B_S(g μ_B S B/kT).

    Its weak-field slope is g² μ_B² S(S+1)/(3kT), the Curie term with m = g μ_B √(S(S+1))."""
    x = g * BOHR_MAGNETON * spin * np.asarray(field_t) / (BOLTZMANN * temperature_k)
    return g * BOHR_MAGNETON * spin * brillouin(spin, x)


def spin_only_moment(spin, g: float = ELECTRON_G):
    """Spin-only effective moment g√(S(S+1)) in Bohr magnetons."""
    return g * math.sqrt(spin * (spin + 1.0))


def stern_gerlach_components(
    spin, gradient_t_m, g: float = ELECTRON_G, field_t=0.0, temperature_k=None
):
    """The 2S + 1 Stern–Gerlach components of a spin S in a gradient ∂B/∂x (T/m).

    Returns (m_S values, forces in N, weights).  The force of component m_S is −m_S g μ_B ∂B/∂x
    (the Zeeman energy is +m_S g μ_B B for an electron spin); the weights are Boltzmann
    populations at ``field_t`` and ``temperature_k`` (equal when either is 0/None).
    """
    two_s = round(2 * spin)
    if two_s < 1 or abs(2 * spin - two_s) > 1e-9:
        raise ValueError(f"stern_gerlach_components: expected S = 1/2, 1, 3/2, …, found {spin!r}")
    ms = np.arange(-two_s, two_s + 1, 2) / 2.0
    forces = -ms * g * BOHR_MAGNETON * gradient_t_m
    if field_t and temperature_k:
        e = ms * g * BOHR_MAGNETON * field_t / (BOLTZMANN * temperature_k)
        w = np.exp(-(e - e.min()))
    else:
        w = np.ones_like(ms)
    return ms, forces, w / w.sum()


def superparamagnetic_force(moment_si, field_t, gradient_t_m, temperature_k):
    """Mean force (N) on a superparamagnetic cluster: m·L(m B/kT)·∂B/∂x, always towards strong
    field; m²/(3kT)·B ∂B/∂x in the weak-field limit."""
    x = zeeman_parameter(moment_si, field_t, temperature_k)
    return np.asarray(moment_si) * langevin(x) * np.asarray(gradient_t_m)
