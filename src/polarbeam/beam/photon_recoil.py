"""Photon recoil: the response of a molecule to the photons of a laser pulse (plain functions).

A pulse crossing the beam between the gratings kicks each absorbing molecule by ħk/m; the fringe
becomes a Poisson mixture of shifted patterns, R = ⟨exp(n̄(e^{iφ1(v)} − 1))⟩ with n̄ = σE/(Aħω),
whose phase and visibility versus pulse energy give the absolute cross-section σ. Optional
isotropic re-emission multiplies each photon's factor by (1 − q) + q·sin φe/φe.
"""

from __future__ import annotations

import math

import numpy as np
from scipy import constants as _sc
from uncertainties import umath

from polarbeam.beam.distributions import GaussianVelocity

__all__ = [
    "PLANCK",
    "SPEED_OF_LIGHT",
    "emission_factor",
    "gaussian_effective_area",
    "kick_phase",
    "mean_photons",
    "photon_energy",
    "poisson_phasor",
    "recoil_observables",
    "recoil_phasor",
    "recoil_velocity",
]

#: Planck constant (J s), CODATA via scipy.constants.
PLANCK = _sc.h


#: Speed of light in vacuum (m/s), exact (SI definition), via scipy.constants.
SPEED_OF_LIGHT = _sc.c


#: Largest number of steps used to track the phase continuously from n̄ = 0.
_MAX_STEPS = 20000


_PHASE_STEP = 0.05  # step in n̄; one photon turns a phasor component by at most |g| ≤ 1 rad


def recoil_velocity(wavelength, mass):
    """Recoil velocity ħk/m = h/(λ m) of one photon (m/s).

    Parameters
    ----------
    wavelength
        Photon wavelength λ (m).
    mass
        Particle mass m (kg).
    """
    return PLANCK / (np.asarray(wavelength, dtype=float) * mass)


def photon_energy(wavelength):
    """Photon energy ħω = hc/λ (J) for a wavelength λ in metres."""
    return PLANCK * SPEED_OF_LIGHT / np.asarray(wavelength, dtype=float)


def gaussian_effective_area(waist, offset=0.0):
    """Effective area (m²) of a Gaussian beam seen at a distance ``offset`` from its axis.

    The local fluence of a pulse of energy E is (2E/(π w0²))·exp(−2r²/w0²) = E/A with
    A = (π w0²/2)·exp(2r²/w0²).  Works on floats and on :mod:`uncertainties` numbers.
    """
    return 0.5 * math.pi * waist**2 * umath.exp(2.0 * offset**2 / waist**2)


def mean_photons(cross_section, pulse_energy, area, wavelength):
    """Mean number of absorbed photons n̄ = σ E/(A ħω) (top-hat fluence E/A)."""
    return (
        cross_section * np.asarray(pulse_energy, dtype=float) / (area * photon_energy(wavelength))
    )


def kick_phase(kick_velocity, weight, period, velocity=None):
    """Fringe phase φ1 = 2π Δx/d of one kick.

    Δx = (Δv/v)·w for the spatial layouts (``velocity`` given, w in m) and Δx = Δv·w for the
    time-domain layout (``velocity=None``, w in s).
    """
    dx = kick_velocity * np.asarray(weight, dtype=float)
    if velocity is not None:
        dx = dx / np.asarray(velocity, dtype=float)
    return 2.0 * math.pi * dx / period


def emission_factor(fluorescence_yield, emission_phase):
    """Per-absorbed-photon factor g = (1 − q) + q·sin φ_e/φ_e of isotropic re-emission.

    ``emission_phase`` φ_e is the fringe phase of one emitted photon's full recoil along the
    grating axis; an isotropic emission projects it with cos θ uniform on [−1, 1].
    """
    x = np.asarray(emission_phase, dtype=float)
    return (1.0 - fluorescence_yield) + fluorescence_yield * np.sinc(x / math.pi)


def poisson_phasor(mean_photons, phase_per_photon, emission=1.0):
    """Σ_n Poisson(n; n̄)·(g e^{iφ1})^n = exp(n̄ (g e^{iφ1} − 1)) for one velocity class."""
    n = np.asarray(mean_photons, dtype=float)
    return np.exp(n * (emission * np.exp(1j * np.asarray(phase_per_photon, dtype=float)) - 1.0))


def _photon_terms(
    phase_coefficient: float,
    velocity: float,
    spread: float,
    emission_coefficient: float,
    fluorescence_yield: float,
    velocity_dependent: bool,
    nodes: int,
):
    """Quadrature weights and z = g e^{iφ1} − 1 per velocity node."""
    if velocity_dependent:
        v, w = GaussianVelocity(velocity, spread).nodes(nodes)
        phi, phie = phase_coefficient / v, emission_coefficient / v
    else:
        w = np.array([1.0])
        phi, phie = np.array([phase_coefficient]), np.array([emission_coefficient])
    g = emission_factor(fluorescence_yield, phie)
    return w, g * np.exp(1j * phi) - 1.0


def recoil_phasor(
    mean_photons,
    phase_coefficient: float,
    velocity: float = 1.0,
    spread: float = 0.0,
    *,
    emission_coefficient: float = 0.0,
    fluorescence_yield: float = 0.0,
    velocity_dependent: bool = True,
    nodes: int = 48,
):
    """Velocity-averaged fringe phasor R = ⟨exp(n̄ (g(v) e^{iφ1(v)} − 1))⟩ (complex array).

    Parameters
    ----------
    mean_photons
        n̄ for each point (array).
    phase_coefficient
        K with φ1(v) = K/v (spatial layouts, rad·m/s) or φ1 = K (time domain, rad); its sign is
        the kick direction.
    velocity, spread
        Mean and standard deviation of the Gaussian velocity distribution (m/s).
    emission_coefficient
        The same coefficient for one emitted photon's full recoil (with ``fluorescence_yield``).
    velocity_dependent
        False for the time-domain layout.
    """
    w, z = _photon_terms(
        phase_coefficient,
        velocity,
        spread,
        emission_coefficient,
        fluorescence_yield,
        velocity_dependent,
        nodes,
    )
    n = np.asarray(mean_photons, dtype=float)
    return (w * np.exp(np.multiply.outer(n, z))).sum(axis=-1)


def recoil_observables(
    mean_photons,
    phase_coefficient: float,
    velocity: float = 1.0,
    spread: float = 0.0,
    *,
    emission_coefficient: float = 0.0,
    fluorescence_yield: float = 0.0,
    velocity_dependent: bool = True,
    nodes: int = 48,
):
    """Phase shift arg R and visibility ratio |R| for each n̄ (see :func:`recoil_phasor`).

    The phase is continuous in n̄: it is followed from n̄ = 0 in steps of 0.05 photons (one
    photon turns each velocity component by at most |g| ≤ 1 rad), as an experiment raising the
    pulse energy follows it, so it is not wrapped into (−π, π].
    """
    w, z = _photon_terms(
        phase_coefficient,
        velocity,
        spread,
        emission_coefficient,
        fluorescence_yield,
        velocity_dependent,
        nodes,
    )
    n = np.asarray(mean_photons, dtype=float)
    flat = n.ravel()
    phase = np.zeros_like(flat)
    modulus = np.ones_like(flat)
    for sign in (1.0, -1.0):
        sel = flat * sign > 0
        if not sel.any():
            continue
        targets = np.abs(flat[sel])
        top = float(targets.max())
        steps = int(min(_MAX_STEPS, max(8, math.ceil(top / _PHASE_STEP))))
        grid = np.linspace(0.0, top, steps + 1)
        allk = np.concatenate([grid, targets])
        order = np.argsort(allk, kind="stable")
        r = (w * np.exp(np.multiply.outer(sign * allk[order], z))).sum(axis=1)
        ph = np.empty_like(allk)
        md = np.empty_like(allk)
        ph[order] = np.unwrap(np.angle(r))
        md[order] = np.abs(r)
        phase[sel] = ph[grid.size :]
        modulus[sel] = md[grid.size :]
    return phase.reshape(n.shape), modulus.reshape(n.shape)
