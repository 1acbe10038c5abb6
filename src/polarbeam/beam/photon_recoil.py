"""Photon recoil: the response of a molecule to the photons of a laser pulse (plain functions).

A pulse crossing the beam between the gratings kicks each absorbing molecule by ħk/m; the fringe
becomes a Poisson mixture of shifted patterns, R = ⟨exp(n̄(e^{iφ1(v)} − 1))⟩ with n̄ = σE/(Aħω),
whose phase and visibility versus pulse energy give the absolute cross-section σ. Optional
isotropic re-emission multiplies each photon's factor by (1 − q) + q·sin φe/φe.
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
from scipy import constants as _sc
from uncertainties import umath

from polarbeam._util.optional import lazy
from polarbeam.beam.distributions import GaussianVelocity

special = lazy("scipy.special", "numerical routines")

__all__ = [
    "PLANCK",
    "SPEED_OF_LIGHT",
    "cw_mean_photons",
    "emission_factor",
    "gaussian_crossing_length",
    "gaussian_effective_area",
    "height_fluence_nodes",
    "kick_phase",
    "mean_fluence_factor",
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


def gaussian_crossing_length(waist, offset=0.0):
    """Effective length (m) of a continuous Gaussian beam crossed at a distance ``offset``.

    A molecule crossing a beam of power P and waist w0 at speed v collects the fluence
    ∫ I dx / v = √(2/π)·P/(w0 v)·exp(−2r²/w0²) = P/(v L) with
    L = √(π/2)·w0·exp(2r²/w0²).  Works on floats and on :mod:`uncertainties` numbers.
    """
    return math.sqrt(0.5 * math.pi) * waist * umath.exp(2.0 * offset**2 / waist**2)


def cw_mean_photons(cross_section, power, length, wavelength, velocity):
    """Mean number of absorbed photons n̄ = σ P/(L v ħω) of a continuous beam crossed at v."""
    return (
        cross_section
        * np.asarray(power, dtype=float)
        / (length * np.asarray(velocity, dtype=float) * photon_energy(wavelength))
    )


def mean_fluence_factor(waist, height, offset=0.0):
    """⟨exp(−2y²/w0²)⟩ for molecules at heights y ~ N(offset, height²): the mean fluence of a
    Gaussian spot relative to its axis, 1/√(1 + 4h²/w0²)·exp(−2r²/(w0² + 4h²))."""
    s = waist**2 + 4.0 * height**2
    return math.sqrt(waist**2 / s) * math.exp(-2.0 * offset**2 / s)


@lru_cache(maxsize=4)
def _hermite_e(n: int):
    x, w = np.polynomial.hermite_e.hermegauss(n)
    return x, w / w.sum()


def height_fluence_nodes(waist: float, offset: float, height: float, n: int = 16):
    """Relative fluence factors and weights over a Gaussian molecular-beam height profile.

    Molecules at heights y ~ N(offset, height²) across a Gaussian spot of waist w0 see the
    fluence F(y) ∝ exp(−2y²/w0²).  Returns (u, p): u = F(y_j)/F(offset) at the Gauss–Hermite
    nodes y_j and their weights p (summing to 1); a zero height gives one node, u = 1.
    """
    if height <= 0:
        return np.array([1.0]), np.array([1.0])
    x, p = _hermite_e(n)
    y = offset + height * x
    return np.exp(-2.0 * (y**2 - offset**2) / waist**2), p


def _photon_terms(
    phase_coefficient: float,
    velocity: float,
    spread: float,
    emission_coefficient: float,
    fluorescence_yield: float,
    velocity_dependent: bool,
    nodes: int,
    cw: bool = False,
    standing: bool = False,
):
    """Quadrature weights, n̄ scale and z = g e^{iφ1} − 1 (g cos φ1 − 1 standing) per node."""
    if velocity_dependent:
        v, w = GaussianVelocity(velocity, spread).nodes(nodes)
        phi, phie = phase_coefficient / v, emission_coefficient / v
    else:
        v = np.array([velocity])
        w = np.array([1.0])
        phi, phie = np.array([phase_coefficient]), np.array([emission_coefficient])
    g = emission_factor(fluorescence_yield, phie)
    z = g * np.cos(phi) - 1.0 + 0j if standing else g * np.exp(1j * phi) - 1.0
    scale = velocity / v if cw else None
    return w, scale, z


def _phasor_function(w, scale, z, *, standing, hit_fraction, fluence_nodes):
    """R(n̄) = (1 − f) + f·Σ_nodes W·F(n̄·S·z), F = exp (travelling) or e^a I₀(a) (standing)."""
    if fluence_nodes is not None and len(fluence_nodes[0]) > 1:
        u, p = (np.asarray(a, dtype=float) for a in fluence_nodes)
        s = np.ones_like(w) if scale is None else scale
        w = np.outer(w, p).ravel()
        scale = np.outer(s, u).ravel()
        z = np.repeat(z, u.size)
    sz = z if scale is None else scale * z
    rms = 1.0 if scale is None else float(np.sqrt(np.sum(w * scale**2)))

    def phasor(n):
        a = np.multiply.outer(n, sz)
        f = special.ive(0, a.real) if standing else np.exp(a)
        r = (w * f).sum(axis=-1)
        if hit_fraction != 1.0:
            r = (1.0 - hit_fraction) + hit_fraction * r
        return r

    return phasor, rms


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
    cw: bool = False,
    standing: bool = False,
    hit_fraction: float = 1.0,
    fluence_nodes=None,
):
    """Velocity-averaged fringe phasor R = ⟨exp(n̄ (g(v) e^{iφ1(v)} − 1))⟩ (complex array).

    Parameters
    ----------
    mean_photons
        n̄ for each point (array); for ``cw`` the value at the mean speed ``velocity``, and
        with ``fluence_nodes`` the value where the relative fluence is 1.
    phase_coefficient
        K with φ1(v) = K/v (spatial layouts, rad·m/s) or φ1 = K (time domain, rad); its sign is
        the kick direction.
    velocity, spread
        Mean and standard deviation of the Gaussian velocity distribution (m/s).
    emission_coefficient
        The same coefficient for one emitted photon's full recoil (with ``fluorescence_yield``).
    velocity_dependent
        False for the time-domain layout.
    cw
        Continuous-wave laser: n̄(v) = n̄·velocity/v (the fluence collected ∝ 1/v).
    standing
        Retro-reflected standing wave: each photon's factor is g cos φ1 (kicks ±ħk), and n̄ is
        the mean over the λ/2 modulation n̄(x) = n̄(1 + cos 2kx), averaged over x:
        exp(n̄z)·I₀(n̄z).
    hit_fraction
        Fraction f of the detected molecules that met the light: R = (1 − f) + f·R_hit.
    fluence_nodes
        (u, p): relative fluence factors and weights over the molecular-beam height
        (:func:`height_fluence_nodes`); None for a line beam.
    """
    w, scale, z = _photon_terms(
        phase_coefficient,
        velocity,
        spread,
        emission_coefficient,
        fluorescence_yield,
        velocity_dependent,
        nodes,
        cw,
        standing,
    )
    phasor, _ = _phasor_function(
        w, scale, z, standing=standing, hit_fraction=hit_fraction, fluence_nodes=fluence_nodes
    )
    return phasor(np.asarray(mean_photons, dtype=float))


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
    cw: bool = False,
    standing: bool = False,
    hit_fraction: float = 1.0,
    fluence_nodes=None,
):
    """Phase shift arg R and visibility ratio |R| for each n̄ (see :func:`recoil_phasor`).

    The phase is continuous in n̄: it is followed from n̄ = 0 in steps of 0.05 photons (one
    photon turns each velocity component by at most |g| ≤ 1 rad), as an experiment raising the
    pulse energy follows it, so it is not wrapped into (−π, π].  When the nodes carry different
    n̄ (cw, beam height) the step is divided by the rms of their n̄ scale.
    """
    w, scale, z = _photon_terms(
        phase_coefficient,
        velocity,
        spread,
        emission_coefficient,
        fluorescence_yield,
        velocity_dependent,
        nodes,
        cw,
        standing,
    )
    phasor, rms = _phasor_function(
        w, scale, z, standing=standing, hit_fraction=hit_fraction, fluence_nodes=fluence_nodes
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
        steps = int(min(_MAX_STEPS, max(8, math.ceil(top * rms / _PHASE_STEP))))
        grid = np.linspace(0.0, top, steps + 1)
        allk = np.concatenate([grid, targets])
        order = np.argsort(allk, kind="stable")
        r = phasor(sign * allk[order])
        ph = np.empty_like(allk)
        md = np.empty_like(allk)
        ph[order] = np.unwrap(np.angle(r))
        md[order] = np.abs(r)
        phase[sel] = ph[grid.size :]
        modulus[sel] = md[grid.size :]
    return phase.reshape(n.shape), modulus.reshape(n.shape)
