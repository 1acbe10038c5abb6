"""Velocity distributions: the first plug point of the beam stage.

Every velocity average in polarbeam (the centroid's ⟨v⁻²⟩, the fringe phasor ⟨e^{iκ/v²}⟩, the
photon-recoil mixture) is a quadrature over the nodes and weights a distribution gives. A measured
distribution (a table, a time-of-flight trace) is a new implementation of
:class:`VelocityDistribution`; nothing else in the pipeline changes.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache
from typing import Protocol, runtime_checkable

import numpy as np

__all__ = ["GaussianVelocity", "VelocityDistribution"]


@runtime_checkable
class VelocityDistribution(Protocol):
    """Nodes and normalised weights of the detected velocity distribution (v > 0, m/s)."""

    @property
    def key(self) -> tuple:
        """A hashable identity (caches of the phase tables are keyed by it)."""
        ...

    def nodes(self, n: int) -> tuple[np.ndarray, np.ndarray]:
        """(velocities, weights summing to 1); ``n`` is the requested quadrature order."""
        ...

    def contrast(self, n: int) -> np.ndarray | None:
        """Relative fringe contrast of each node (None: the same for every velocity)."""
        ...


@lru_cache(maxsize=8)
def _hermite(n: int):
    x, w = np.polynomial.hermite_e.hermegauss(n)
    return x, w / w.sum()


@dataclass(frozen=True)
class GaussianVelocity:
    """A Gaussian of mean ``mean`` and standard deviation ``spread`` (0: monochromatic),
    truncated at v > 0 and integrated by Gauss–Hermite quadrature."""

    mean: float
    spread: float = 0.0

    @property
    def key(self) -> tuple:
        return ("gaussian", float(self.mean), float(self.spread))

    def nodes(self, n: int = 48) -> tuple[np.ndarray, np.ndarray]:
        if self.spread <= 0:
            return np.array([float(self.mean)]), np.array([1.0])
        x, w = _hermite(n)
        v = self.mean + self.spread * x
        keep = (v > 0.02 * self.mean) & (w > 1e-13 * w.max())  # drop negligible far-tail nodes
        v, w = v[keep], w[keep]
        return v, w / w.sum()

    def contrast(self, n: int = 48) -> None:
        return None
