"""The interferometer's fringe contrast per velocity class, for the deflection phasor.

In a Talbot–Lau interferometer each velocity class v carries its own fringe, of complex first
harmonic c₁(v) = A₁⁽¹⁾A₁⁽³⁾B₂(ξ(v)) on the mean c₀(v) (docs/visibility.md §1). A deflection
turns each class by κ/v², so the detected fringe is Σ_v w_v c₁(v) e^{iκ/v²}: the classes are
weighted by population × their own contrast 2c₁/c₀, which the near-field model gives and which
changes with v (through ξ = L/L_T, and through φ₀, n₀ ∝ P/v for a light grating; B₂ even
changes sign). :class:`ModelContrastVelocity` is that distribution: the per-node ``contrast(n)``
of the :class:`~polarbeam.beam.distributions.VelocityDistribution` protocol, which every fringe
phasor (:mod:`polarbeam.beam.velocity`) already multiplies into the weights. Nothing else in the
deflection fit changes.

The contrast is signed (a class whose B₂ has the other sign adds its fringe half a period
away); the set is multiplied by the sign of Σ w c so that the zero-field fringe, the reference of
every measured phase, has a positive amplitude. Its modulus at zero field is then the model's
velocity-averaged visibility 2⟨c₁⟩/⟨c₀⟩ (weights: the detected population).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from polarbeam.beam.talbot.interferometer import (
    LightGrating,
    TalbotLauInterferometer,
    talbot_parameter,
)

__all__ = ["GratingContrast", "ModelContrastVelocity"]

#: most quadrature nodes a model-contrast average asks of its base distribution
_MAX_NODES = 2000


@dataclass(frozen=True)
class GratingContrast:
    """The quantum (or classical) model of one compound at one laser power: the fringe contrast
    2c₁(v)/c₀(v) of each velocity class (SI: kg, W, C·m²/V, m²)."""

    interferometer: TalbotLauInterferometer
    mass: float
    power: float = 0.0
    alpha_re: float = 0.0
    sigma_abs: float = 0.0
    model: str = "quantum"

    def class_contrast(self, velocities) -> np.ndarray:
        """Signed visibility 2c₁/c₀ of a beam of each single velocity (m/s)."""
        v = np.asarray(velocities, dtype=float)
        c1, c0 = self.interferometer.harmonics(
            self.mass, v, self.power, self.alpha_re, self.sigma_abs, self.model
        )
        return np.broadcast_to(np.real(2.0 * c1 / c0), v.shape).astype(float)

    def turns_per_sigma(self, mean: float, spread: float) -> float:
        """Radians the argument of B₂ turns over one standard deviation of the velocity:
        φ₀(1 + πξ)σ/v at the slow side for a light grating (as in
        ``TalbotLauInterferometer.velocity_nodes``); for slits B₂ is periodic in ξ with kinks
        (the slit edges), so 4πξσ/v (two turns per period of ξ): the kinks converge slowly."""
        tl = self.interferometer
        v_lo = max(mean - 3.0 * spread, 0.05 * mean)
        xi = float(talbot_parameter(tl.spacing, tl.period, self.mass, v_lo))
        if isinstance(tl.second, LightGrating):
            phi0 = float(abs(tl.second.strengths(self.alpha_re, 0.0, self.power, v_lo)[0]))
            return max(phi0, 1.0) * (1.0 + np.pi * xi) * spread / v_lo
        return 4.0 * np.pi * xi * spread / v_lo

    def apply(self, dist):
        """``dist`` with this model's contrast per class; a distribution that states its own
        contrast (a ``contrast`` column of velocities.csv) keeps it: the stated one takes
        precedence."""
        if isinstance(dist, ModelContrastVelocity) or dist.contrast(48) is not None:
            return dist
        return ModelContrastVelocity(dist, self)


@lru_cache(maxsize=256)
def _contrast_at(grating: GratingContrast, v: tuple, w: tuple) -> np.ndarray:
    c = grating.class_contrast(np.asarray(v))
    total = float(np.dot(np.asarray(w), c))
    return c if total >= 0 else -c


@dataclass(frozen=True)
class ModelContrastVelocity:
    """A velocity distribution whose classes carry the interferometer model's fringe contrast.

    ``base`` gives the nodes and weights (any
    :class:`~polarbeam.beam.distributions.VelocityDistribution` without a contrast of its own),
    ``grating`` the contrast of each node. Enough nodes are asked of a spread distribution to
    resolve the oscillation of B₂ across it.
    """

    base: object
    grating: GratingContrast

    @property
    def key(self) -> tuple:
        g = self.grating
        return (
            "grating-contrast",
            *self.base.key,
            g.interferometer,
            float(g.mass),
            float(g.power),
            float(g.alpha_re),
            float(g.sigma_abs),
            g.model,
        )

    @property
    def shape(self) -> str:
        return getattr(self.base, "shape", "gaussian")

    @property
    def mean(self) -> float:
        return float(self.base.mean)

    @property
    def spread(self) -> float:
        return float(self.base.spread)

    @property
    def spans(self):
        """The base's bin widths (a table's classes), None for point nodes."""
        return getattr(self.base, "spans", None)

    def order(self, n: int) -> int:
        """Quadrature order asked of the base: ``n``, or more where B₂ oscillates with v (a
        composite rule of 9 panels of 2σ, at least 8 + 2 nodes per radian of turn in each)."""
        spread = float(getattr(self.base, "spread", 0.0) or 0.0)
        if spread <= 0:
            return n
        turn = self.grating.turns_per_sigma(self.mean, spread)
        return int(min(max(n, 9 * (8 + np.ceil(4.0 * turn))), _MAX_NODES))

    def nodes(self, n: int = 48) -> tuple[np.ndarray, np.ndarray]:
        return self.base.nodes(self.order(n))

    def contrast(self, n: int = 48) -> np.ndarray:
        v, w = self.nodes(n)
        return _contrast_at(self.grating, tuple(np.asarray(v).tolist()), tuple(w.tolist()))

    def scaled(self, factor: float) -> ModelContrastVelocity:
        """Every velocity times ``factor``; the contrast follows the moved classes."""
        return ModelContrastVelocity(self.base.scaled(factor), self.grating)

    def widened(self, factor: float) -> ModelContrastVelocity:
        return ModelContrastVelocity(self.base.widened(factor), self.grating)
