"""The beam stage's plug points: velocity distributions and particle responses.

Any object with ``key``, ``nodes(n)`` and ``contrast(n)`` serves as a velocity distribution; any
object with ``alpha_eff(alpha, dipole, T)`` as a particle response. Checked against independent
closed forms.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pytest
from scipy import constants as sc

from polarbeam.beam import (
    GaussianVelocity,
    LangevinDebye,
    ParticleResponse,
    VelocityDistribution,
    averaged_phasor_phase,
    mean_inverse_square,
)


@dataclass(frozen=True)
class TwoSpeeds:
    """Two velocity classes (a toy measured distribution) with their own fringe contrast."""

    v: tuple[float, float] = (150.0, 250.0)
    w: tuple[float, float] = (0.3, 0.7)
    c: tuple[float, float] | None = None

    @property
    def key(self) -> tuple:
        return ("two", self.v, self.w, self.c)

    def nodes(self, n: int = 48):
        return np.array(self.v), np.array(self.w)

    def contrast(self, n: int = 48):
        return None if self.c is None else np.array(self.c)


def test_implementations_satisfy_the_protocols():
    assert isinstance(GaussianVelocity(200.0, 10.0), VelocityDistribution)
    assert isinstance(TwoSpeeds(), VelocityDistribution)
    assert isinstance(LangevinDebye(), ParticleResponse)


def test_gaussian_nodes_reproduce_mean_and_spread():
    # Gauss–Hermite quadrature is exact for polynomials (common practice); the truncation at
    # v > 0.02 v̄ removes nothing at σ/v̄ = 0.1
    v, w = GaussianVelocity(200.0, 20.0).nodes(48)
    assert w.sum() == pytest.approx(1.0, abs=1e-14)
    assert np.sum(w * v) == pytest.approx(200.0, rel=1e-12)
    assert np.sqrt(np.sum(w * (v - 200.0) ** 2)) == pytest.approx(20.0, rel=1e-10)


def test_a_new_distribution_plugs_into_the_averages():
    d = TwoSpeeds()
    # independent: the discrete averages written out
    assert mean_inverse_square(d) == pytest.approx(0.3 / 150.0**2 + 0.7 / 250.0**2, rel=1e-14)
    kappa = np.array([0.0, 2.0e3, -2.0e3])
    z = 0.3 * np.exp(1j * kappa / 150.0**2) + 0.7 * np.exp(1j * kappa / 250.0**2)
    phase, modulus = averaged_phasor_phase(kappa, d)
    assert phase == pytest.approx(np.angle(z), abs=1e-12)
    assert modulus == pytest.approx(np.abs(z), rel=1e-12)


def test_contrast_per_node_weights_the_phasor():
    d = TwoSpeeds(c=(0.5, 1.0))
    kappa = np.array([1.0e3, 4.0e3])
    z = 0.3 * 0.5 * np.exp(1j * kappa / 150.0**2) + 0.7 * np.exp(1j * kappa / 250.0**2)
    phase, modulus = averaged_phasor_phase(kappa, d)
    assert phase == pytest.approx(np.angle(z), abs=1e-12)
    assert modulus == pytest.approx(np.abs(z), rel=1e-12)


def test_langevin_debye_one_debye_at_300_k():
    # α_or = μ²/(3kT): 1 D (1e-21/c C·m, definition of the debye) at 300 K is 8.048 Å³ in
    # volume units (α/4πε0), from scipy.constants (CODATA)
    mu = 1e-21 / sc.c
    a = LangevinDebye().alpha_eff(0.0, mu, 300.0)
    volume_A3 = a / (4 * math.pi * sc.epsilon_0) * 1e30
    expected = mu**2 / (3 * sc.k * 300.0) / (4 * math.pi * sc.epsilon_0) * 1e30
    assert volume_A3 == pytest.approx(expected)
    assert volume_A3 == pytest.approx(8.048, abs=5e-4)
    assert LangevinDebye().alpha_eff(1e-40, 0.0, 300.0) == 1e-40
