"""Statistics of recoil data: Rician visibility ratios and shared laser-off references.

A visibility ratio is the modulus of a fitted fringe amplitude: with Gaussian noise σ on each
quadrature of an amplitude of true modulus ν, the measured modulus r is Rician, never negative
and biased up at low signal.  The fit compares r with the Rician mean
E[r] = σ√(π/2)·L_{1/2}(−ν²/2σ²) and weights it by the Rician standard deviation.

Points referenced to the same laser-off fringe share its errors: the laser-off phase error
enters every phase of the reference as a common term, the relative laser-off visibility error
every visibility ratio in proportion to it.  The residuals are whitened with the Cholesky
factor of that block covariance.
"""

from __future__ import annotations

import math

import numpy as np

from polarbeam._util.optional import lazy

linalg = lazy("scipy.linalg", "numerical routines")
special = lazy("scipy.special", "numerical routines")

__all__ = [
    "common_covariance",
    "rician_mean",
    "rician_sd",
    "whiten",
]


def rician_mean(nu, sigma):
    """E[r] of a Rician modulus: σ√(π/2)·e^{−x}[(1 + 2x) I₀(x) + 2x I₁(x)], x = ν²/4σ².

    That is σ√(π/2)·L_{1/2}(−ν²/2σ²); written with the scaled Bessel functions so it stays
    finite at large ν/σ, where it tends to √(ν² + σ²).
    """
    nu = np.abs(np.asarray(nu, dtype=float))
    sigma = np.asarray(sigma, dtype=float)
    x = nu**2 / (4.0 * sigma**2)
    far = x > _FAR
    xs = np.where(far, 0.0, x)
    near = (
        sigma
        * math.sqrt(0.5 * math.pi)
        * ((1.0 + 2.0 * xs) * special.ive(0, xs) + 2.0 * xs * special.ive(1, xs))
    )
    # far above the noise: ν + σ²/2ν + O(σ⁴/ν³), relative error < 1e-12 beyond x = 1e6
    return np.where(far, np.sqrt(nu**2 + sigma**2), near)


#: ν²/4σ² beyond which the Rician mean is √(ν² + σ²) to double precision (scipy's scaled
#: Bessel functions stop at about 1e9).
_FAR = 1e6


def rician_sd(nu, sigma):
    """Standard deviation of a Rician modulus: √(ν² + 2σ² − E[r]²)."""
    nu = np.asarray(nu, dtype=float)
    sigma = np.asarray(sigma, dtype=float)
    var = nu**2 + 2.0 * sigma**2 - rician_mean(nu, sigma) ** 2
    return np.sqrt(np.maximum(var, 1e-12 * sigma**2))


def common_covariance(sd, labels, common):
    """diag(sd²) plus common[i]·common[j] for every pair of rows sharing a non-empty label."""
    sd = np.asarray(sd, dtype=float)
    cov = np.diag(sd**2)
    lab = np.asarray(labels, dtype=object)
    c = np.asarray(common, dtype=float)
    for name in set(labels) - {""}:
        sel = np.flatnonzero(lab == name)
        cov[np.ix_(sel, sel)] += np.outer(c[sel], c[sel])
    return cov


def whiten(residual, cov):
    """L⁻¹·residual with cov = L Lᵀ (Cholesky): residuals whose squares sum to the χ²."""
    chol = linalg.cholesky(cov, lower=True)
    return linalg.solve_triangular(chol, residual, lower=True)
