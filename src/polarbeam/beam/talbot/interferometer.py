"""The symmetric three-grating interferometer: fringe harmonics, visibility, velocity average.

Gratings G1, G2, G3 of common period d at z = 0, L, 2L. With the Fourier coefficients A_n of
|t|² of G1 and G3 and the Talbot coefficients of G2 the detected signal versus the G3 position
x_s is S(x_s) = Σ_n A_n⁽¹⁾ A_n⁽³⁾ B_{2n}(nξ) e^{−2πinx_s/d}, ξ = L/L_T, L_T = d²/λ,
λ = h/(mv). The sinusoidal visibility is 2|A_1⁽¹⁾A_1⁽³⁾B_2(ξ)|/(A_0⁽¹⁾A_0⁽³⁾B_0(0)) =
2 sinc(πf₁) sinc(πf₃)|B₂(ξ)|/B₀(0). A beam of many velocities adds the signals: the first
harmonic and the mean are averaged separately (B₂ changes sign with v), then divided.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import numpy as np
from scipy import constants as _sc

from polarbeam._util.optional import lazy
from polarbeam.beam.distributions import GaussianVelocity, VelocityDistribution
from polarbeam.beam.talbot.coefficients import (
    ABSORBED_CHOICES,
    MODELS,
    light_coefficient,
    material_coefficient,
    slit_coefficient,
)
from polarbeam.beam.talbot.light import mean_absorbed_photons, phase_amplitude

special = lazy("scipy.special", "numerical routines")

__all__ = [
    "LightGrating",
    "MaterialGrating",
    "TalbotLauInterferometer",
    "talbot_parameter",
]

Model = Literal["quantum", "classical"]

#: Grid points per turn of the Bessel argument in the velocity average (2 gives < 1e-6 against a
#: 20001-point reference; 1 already < 2e-5; docs/visibility.md §8).
_PPT = 2.0


def talbot_parameter(spacing, period, mass, velocity):
    """ξ = L/L_T = L λ/d² with λ = h/(m v)."""
    return spacing * _sc.h / (mass * np.asarray(velocity, dtype=float) * period**2)


@dataclass(frozen=True)
class MaterialGrating:
    """A slit grating of open fraction f (slit width / period)."""

    open_fraction: float

    def __post_init__(self):
        if not 0.0 < self.open_fraction < 1.0:
            raise ValueError(f"open_fraction: expected 0 < f < 1, found {self.open_fraction!r}")


@dataclass(frozen=True)
class LightGrating:
    """A retro-reflected Gaussian beam: wavelength λ_L, vertical waist w_y, power scale."""

    wavelength: float
    waist: float
    absorbed: Literal["kept", "lost"] = "kept"
    power_scale: float = 1.0

    def __post_init__(self):
        if self.absorbed not in ABSORBED_CHOICES:
            raise ValueError(
                f"absorbed_molecules: expected one of {ABSORBED_CHOICES}, found {self.absorbed!r}"
            )
        if self.wavelength <= 0 or self.waist <= 0:
            raise ValueError("wavelength and waist must be positive")

    def strengths(self, alpha_re, sigma_abs, power, velocity):
        """(φ0, n0) for stated power(s) and velocities (arrays broadcast)."""
        p = self.power_scale * np.asarray(power, dtype=float)
        phi0 = phase_amplitude(alpha_re, p, self.waist, velocity)
        n0 = mean_absorbed_photons(sigma_abs, p, self.waist, velocity, self.wavelength)
        return phi0, n0


@dataclass(frozen=True)
class TalbotLauInterferometer:
    """Three gratings of period d at equal distances L; G1 and G3 are slit gratings."""

    spacing: float
    period: float
    first: MaterialGrating
    second: MaterialGrating | LightGrating
    third: MaterialGrating

    def __post_init__(self):
        if isinstance(self.second, LightGrating):
            expected = 0.5 * self.second.wavelength
            if abs(expected - self.period) > 1e-6 * self.period:
                raise ValueError(
                    f"light grating period: expected laser_wavelength/2 = {expected:.6g} m, "
                    f"found grating period {self.period:.6g} m"
                )

    @property
    def light(self) -> bool:
        return isinstance(self.second, LightGrating)

    def with_second(self, second) -> TalbotLauInterferometer:
        return TalbotLauInterferometer(self.spacing, self.period, self.first, second, self.third)

    def harmonics(
        self, mass, velocity, power=0.0, alpha_re=0.0, sigma_abs=0.0, model: Model = "quantum"
    ):
        """(first harmonic c₁, mean c₀) of the signal per velocity and power (broadcast arrays).

        S(x_s) = c₀ + 2 Re[c₁ e^{−2πix_s/d}]; c₁ = A₁⁽¹⁾A₁⁽³⁾B₂(ξ), c₀ = A₀⁽¹⁾A₀⁽³⁾B₀(0).
        """
        if model not in MODELS:
            raise ValueError(f"model: expected one of {MODELS}, found {model!r}")
        xi = talbot_parameter(self.spacing, self.period, mass, velocity)
        f1, f3 = self.first.open_fraction, self.third.open_fraction
        a1 = slit_coefficient(1, f1) * slit_coefficient(1, f3)
        a0 = f1 * f3
        g = self.second
        if isinstance(g, LightGrating):
            phi0, n0 = g.strengths(alpha_re, sigma_abs, power, velocity)
            xi_b = np.broadcast_to(xi, np.broadcast(xi, phi0).shape)
            b2 = light_coefficient(2, xi_b, phi0, n0, g.absorbed, model)
            if g.absorbed == "kept":  # B₀(0) = 1: absorption moves molecules, loses none
                b0 = np.ones(xi_b.shape)
            else:  # B₀(0) = e^{−n0/2} I₀(n0/2), the mean of e^{−n0 cos²}
                b0 = special.i0e(0.5 * np.broadcast_to(n0, xi_b.shape))
        else:
            xi = np.asarray(xi, dtype=float)
            shape = np.broadcast(xi, np.asarray(power)).shape
            b2 = np.broadcast_to(material_coefficient(2, xi, g.open_fraction, model), shape)
            b0 = np.full(shape, g.open_fraction)
        return a1 * b2, a0 * b0

    def first_harmonic(
        self,
        mass: float,
        velocity: VelocityDistribution | float,
        power=0.0,
        alpha_re: float = 0.0,
        sigma_abs: float = 0.0,
        model: Model = "quantum",
        nodes: int = 48,
    ) -> np.ndarray:
        """Velocity-averaged complex first harmonic relative to the mean, 2⟨c₁⟩/⟨c₀⟩, per power.

        ``velocity`` is a :class:`~polarbeam.beam.distributions.VelocityDistribution` (or one
        velocity in m/s). The harmonic, not its modulus, is averaged: B₂ changes sign with v.
        """
        # duck typing: a runtime Protocol isinstance check costs more than the model here
        dist = velocity if hasattr(velocity, "nodes") else GaussianVelocity(float(velocity))
        p = np.asarray(power, dtype=float)
        v, w = self.velocity_nodes(mass, dist, p, alpha_re, nodes)
        flat = p.reshape(1, -1)
        c1, c0 = self.harmonics(mass, v[:, None], flat, alpha_re, sigma_abs, model)
        c1 = np.broadcast_to(c1, (v.size, flat.size))
        c0 = np.broadcast_to(c0, (v.size, flat.size))
        return (2.0 * (w @ c1) / (w @ c0)).reshape(p.shape)

    def velocity_nodes(self, mass, dist, power, alpha_re, nodes: int = 48):
        """Nodes and weights of the velocity average, resolving the oscillation of B₂ in v.

        B₂ ≈ J₂(φ0 sin πξ) turns by |db/dv| ≤ φ0(1 + πξ)/v; over one standard deviation σ_v
        that is Δb = φ0(1 + πξ)σ_v/v radians. A Gaussian (``mean``, ``spread``) is integrated by
        the trapezoid rule on a uniform grid over ±6σ_v with max(2 Δb/2π + 4, nodes/12) points per
        σ_v (exponentially accurate for a smooth integrand that decays like the Gaussian: against
        a 20001-point reference the error is < 1e-6, tests/beam/test_talbot.py); any other
        distribution (a measured table, a flux shape) gives its own nodes (``dist.nodes(nodes)``).
        """
        if not isinstance(dist, GaussianVelocity) or dist.spread <= 0:
            return dist.nodes(nodes)  # a table, a flux shape: its own classes or rule
        mean, spread = dist.mean, dist.spread
        v_lo = max(mean - 3.0 * spread, 0.05 * mean)
        xi = float(talbot_parameter(self.spacing, self.period, mass, v_lo))
        phi0 = 0.0
        if isinstance(self.second, LightGrating):
            pmax = float(np.max(np.abs(power))) if np.size(power) else 0.0
            phi0 = float(np.max(np.abs(self.second.strengths(alpha_re, 0.0, pmax, v_lo)[0])))
        elif self.light is False:
            phi0 = 1.0
        turn = phi0 * (1.0 + np.pi * xi) * spread / v_lo
        per_sigma = max(_PPT * turn / (2.0 * np.pi) + 4.0, nodes / 12.0)
        n = int(min(np.ceil(12.0 * per_sigma), 4001)) | 1
        v = np.linspace(mean - 6.0 * spread, mean + 6.0 * spread, n)
        keep = v > 0.02 * mean  # the Gaussian truncated at v > 0 (as GaussianVelocity)
        v = v[keep]
        w = np.exp(-0.5 * ((v - mean) / spread) ** 2)
        return v, w / w.sum()

    def visibility(self, mass, velocity, power=0.0, alpha_re=0.0, sigma_abs=0.0, **kw):
        """Sinusoidal visibility |2⟨c₁⟩/⟨c₀⟩| of the velocity-averaged signal, per power."""
        return np.abs(self.first_harmonic(mass, velocity, power, alpha_re, sigma_abs, **kw))
