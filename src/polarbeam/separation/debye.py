"""Separation of α and μ: the Langevin–Debye temperature dependence α_eff = α + ⟨μ²⟩/(3kT).

With several source temperatures, α_eff is fitted against x = 1/T (intercept α, slope
β = ⟨μ²⟩/(3k)).  The α_eff values share the deflector, geometry and mass inputs, so their errors
are correlated.  Weighting a straight-line fit with the *full* covariance of values that share a
multiplicative scale error biases the fit low (Peelle's pertinent puzzle), so the weights come
from the errors specific to each series (its fit statistics, velocity and temperature), while the
estimate — a fixed linear combination of the α_eff — is propagated exactly through the full
correlated covariance by :mod:`uncertainties`.  Temperature errors enter through x = 1/T both in
the propagation and, as an effective variance (β·σ_x)², in the weights; σ_x there is again the
part specific to each series (a thermometer offset common to every series is propagated, but does
not weight).

What the slope says about μ (a value or an upper limit, with intervals that keep their coverage)
is decided in :mod:`polarbeam.separation.dipole`. :func:`bounded_upper_limit` (flat prior on
β ≥ 0) remains for the planner's predicted limits.
"""

from __future__ import annotations

import math
from collections import Counter
from dataclasses import dataclass

import numpy as np
from uncertainties import UFloat

from polarbeam._util.optional import lazy
from polarbeam.constants import ANGSTROM3_SI, BOLTZMANN

stats = lazy("scipy.stats", "numerical routines")

__all__ = [
    "DebyeFit",
    "alpha_with_known_dipole",
    "bounded_upper_limit",
    "debye_fit",
    "dipole_from_known_alpha",
]


@dataclass(frozen=True)
class DebyeFit:
    """Intercept α (C·m²/V), slope β = ⟨μ²⟩/3k (C·m²·K/V), μ² (C²·m²), goodness of fit."""

    alpha: UFloat
    slope: UFloat
    mu2: UFloat
    chi2: float
    ndof: int
    weights: np.ndarray

    @property
    def p_value(self) -> float:
        return float(stats.chi2.sf(self.chi2, self.ndof)) if self.ndof > 0 else math.nan


def specific_variances(values: list[UFloat]) -> np.ndarray:
    """Variance of each value from the variables no other value depends on."""
    comps = [v.error_components() for v in values]
    counts = Counter(var for c in comps for var in c)
    return np.array([sum(s * s for var, s in c.items() if counts[var] == 1) for c in comps])


def _specific_std_devs(values: list) -> np.ndarray:
    """Standard deviation of each value (uncertain or plain) from the variables no other value
    depends on (a plain number has none)."""
    comps = [v.error_components() if hasattr(v, "error_components") else {} for v in values]
    counts = Counter(var for c in comps for var in c)
    return np.array(
        [float(math.sqrt(sum(s**2 for var, s in c.items() if counts[var] == 1))) for c in comps]
    )


def debye_fit(alpha_eff: list[UFloat], temperatures: list[UFloat]) -> DebyeFit:
    """Straight line α_eff = α + β/T through ≥ 2 series (see module docstring)."""
    if len(alpha_eff) < 2:
        raise ValueError("a Debye fit needs at least two temperatures")
    unit = ANGSTROM3_SI  # work in Å³ and 1/K so the normal equations stay well scaled
    alpha_eff = [a / unit for a in alpha_eff]
    x = [1.0 / t for t in temperatures]
    xn = np.array([getattr(xi, "nominal_value", xi) for xi in x])
    yn = np.array([a.nominal_value for a in alpha_eff])
    var = specific_variances(alpha_eff)
    sx = _specific_std_devs(x)
    if np.any(var <= 0):  # nothing series-specific: fall back to the total variances
        var = np.array([a.std_dev**2 for a in alpha_eff])
    beta = 0.0
    for _ in range(3):  # effective-variance iteration for the errors in 1/T
        w = 1.0 / (var + (beta * sx) ** 2)
        A = np.column_stack([np.ones_like(xn), xn])
        sol = np.linalg.solve(A.T @ (w[:, None] * A), A.T @ (w * yn))
        beta = float(sol[1])
    # the same linear estimator, evaluated with uncertain numbers
    s0 = float(np.sum(w))
    s1 = sum(wi * xi for wi, xi in zip(w, x, strict=True))
    s2 = sum(wi * xi * xi for wi, xi in zip(w, x, strict=True))
    b0 = sum(wi * yi for wi, yi in zip(w, alpha_eff, strict=True))
    b1 = sum(wi * xi * yi for wi, xi, yi in zip(w, x, alpha_eff, strict=True))
    det = s0 * s2 - s1 * s1
    alpha = (s2 * b0 - s1 * b1) / det
    slope = (s0 * b1 - s1 * b0) / det
    resid = yn - (alpha.nominal_value + slope.nominal_value * xn)
    chi2 = float(np.sum(w * resid**2))
    alpha, slope = alpha * unit, slope * unit
    return DebyeFit(alpha, slope, 3.0 * BOLTZMANN * slope, chi2, len(alpha_eff) - 2, w)


def dipole_from_known_alpha(alpha_eff: UFloat, temperature: UFloat, alpha_known: UFloat) -> UFloat:
    """⟨μ²⟩ = 3kT (α_eff − α) from one series and an independently known α."""
    return 3.0 * BOLTZMANN * temperature * (alpha_eff - alpha_known)


def bounded_upper_limit(estimate: float, sigma: float, cl: float = 0.95) -> float:
    """Upper limit on a parameter ≥ 0 from a Gaussian likelihood (flat prior on [0, ∞))."""
    if sigma <= 0:
        return max(estimate, 0.0)
    lo = stats.norm.cdf(-estimate / sigma)  # prior mass cut away below zero
    target = lo + cl * (1.0 - lo)
    return float(estimate + sigma * stats.norm.ppf(target))


def alpha_with_known_dipole(alpha_eff: list[UFloat], temperatures: list, mu_known) -> UFloat:
    """α from every series with a known dipole: the weighted mean of α_eff − μ²/(3kT).

    The weights are those of the Debye fit (each series' specific variance, see
    :func:`specific_variances`); the estimate is propagated through the full correlated
    covariance, the known μ's error included (it is common to every series).
    """
    unit = ANGSTROM3_SI
    values = [a / unit for a in alpha_eff]
    var = specific_variances(values)
    if np.any(var <= 0):
        var = np.array([v.std_dev**2 for v in values])
    w = 1.0 / var
    orient = [mu_known**2 / (3.0 * BOLTZMANN * t) / unit for t in temperatures]
    total = sum(wi * (v - o) for wi, v, o in zip(w, values, orient, strict=True))
    return total / float(np.sum(w)) * unit
