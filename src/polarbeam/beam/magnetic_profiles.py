"""Beam profiles behind a magnet: spin-resolved Stern–Gerlach components and superparamagnetic
clusters, as plain functions of the detector coordinate.

A particle of velocity v feeling a force F in the magnet lands at x0 + F·κ/v², with κ (m³/(N s²))
the flight factor of the layout (for a beam-profile layout κ = coupling/(g_B·I²·m)-like
geometry; here it is an input).  The field-free beam is a Gaussian of width σ; the velocity
distribution (any :class:`~polarbeam.beam.distributions.VelocityDistribution`) spreads each
component along x.

* Spin S (g-factor g), spin kept through the magnet: 2S + 1 components at forces
  −m_S g μ_B ∂B/∂x with weights from :func:`~polarbeam.beam.magnetic.stern_gerlach_components`.
* Superparamagnetic cluster of moment m: one component at the mean force m·L(mB/kT)·∂B/∂x,
  every cluster pulled to strong field (a one-sided shift).
"""

from __future__ import annotations

import numpy as np

from polarbeam.beam.magnetic import stern_gerlach_components, superparamagnetic_force

__all__ = ["cluster_profile", "component_profile", "spin_profile"]


def component_profile(x, forces, weights, kappa, velocities, velocity_weights, x0, sigma):
    """Normalised density (1/m) at ``x`` of components with ``forces`` (N) and ``weights``,
    averaged over velocity nodes (``velocities`` m/s, ``velocity_weights`` summing to 1)."""
    x = np.asarray(x, dtype=float)[:, None, None]
    f = np.asarray(forces, dtype=float)[None, :, None]
    w = np.asarray(weights, dtype=float)[None, :, None]
    v = np.asarray(velocities, dtype=float)[None, None, :]
    wv = np.asarray(velocity_weights, dtype=float)[None, None, :]
    centre = x0 + f * kappa / v**2
    g = np.exp(-0.5 * ((x - centre) / sigma) ** 2) / (sigma * np.sqrt(2.0 * np.pi))
    return np.sum(g * w * wv, axis=(1, 2))


def spin_profile(
    x,
    spin,
    g,
    gradient,
    kappa,
    velocities,
    velocity_weights,
    x0,
    sigma,
    field=0.0,
    temperature=None,
):
    """Density of a spin-S beam: 2S + 1 Stern–Gerlach components (thermal weights at
    ``field`` and ``temperature``, equal when not given)."""
    _, forces, weights = stern_gerlach_components(spin, gradient, g, field, temperature)
    return component_profile(x, forces, weights, kappa, velocities, velocity_weights, x0, sigma)


def cluster_profile(
    x, moment, field, gradient, temperature, kappa, velocities, velocity_weights, x0, sigma
):
    """Density of a superparamagnetic-cluster beam: the field-free profile shifted by the mean
    force m·L(mB/kT)·∂B/∂x towards strong field."""
    force = float(superparamagnetic_force(moment, field, gradient, temperature))
    return component_profile(x, [force], [1.0], kappa, velocities, velocity_weights, x0, sigma)
