"""Unified confidence intervals for a parameter bounded at zero (Feldman & Cousins 1998).

The Debye slope s = ⟨μ²⟩/(3k) cannot be negative. Deciding from the data whether to quote a value
or an upper limit ("flip-flopping") breaks the stated coverage; the likelihood-ratio ordering of
Feldman & Cousins (Phys. Rev. D 57, 3873 (1998), section IV.B: a Gaussian with a boundary at the
origin) makes the transition from an upper limit to a two-sided interval automatic and keeps the
coverage at its nominal value for every true s ≥ 0.

The estimate is x ~ N(μ, σ²) with μ ≥ 0 (the Debye line is linear in its parameters, so profiling
the intercept leaves a Gaussian in the slope with the slope's full standard error). For each μ the
acceptance region [x₁(μ), x₂(μ)] holds the values of x with the largest ratio
R(x) = L(x | μ) / L(x | max(0, x)) until its probability reaches the confidence level; the interval
for an observed x₀ is every μ whose region contains x₀.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

from polarbeam._util.optional import lazy

optimize = lazy("scipy.optimize", "numerical routines")
stats = lazy("scipy.stats", "numerical routines")


__all__ = ["BoundedInterval", "acceptance_region", "unified_interval"]


def _log_ratio(x: float, mu: float) -> float:
    """ln R(x) = ln L(x | μ) − ln L(x | μ̂), μ̂ = max(0, x), unit variance."""
    return -0.5 * (x - mu) ** 2 + 0.5 * (x - max(0.0, x)) ** 2


def _lower_partner(x2: float, mu: float) -> float:
    """The x₁ ≤ μ with R(x₁) = R(x₂) (−∞ when every x < 0 has R ≥ R(x₂), as at μ = 0)."""
    if 2.0 * mu - x2 >= 0.0:
        return 2.0 * mu - x2  # both edges on the x ≥ 0 side: symmetric about μ
    if mu <= 0.0:
        return -math.inf
    # on x < 0, ln R = xμ − μ²/2 is linear in x
    return (_log_ratio(x2, mu) + 0.5 * mu * mu) / mu


@lru_cache(maxsize=4096)
def acceptance_region(mu: float, cl: float) -> tuple[float, float]:
    """[x₁(μ), x₂(μ)] in units of σ: the likelihood-ratio-ordered region of probability ``cl``."""
    if not 0.0 < cl < 1.0:
        raise ValueError(f"confidence level: expected 0 < cl < 1, found {cl!r}")
    mu = max(float(mu), 0.0)

    def excess(x2: float) -> float:
        x1 = _lower_partner(x2, mu)
        return float(stats.norm.cdf(x2 - mu) - stats.norm.cdf(x1 - mu)) - cl

    hi = mu + 1.0
    while excess(hi) < 0.0:
        hi += 1.0
    x2 = optimize.brentq(excess, mu, hi, xtol=1e-12, rtol=1e-14)
    return _lower_partner(x2, mu), x2


@dataclass(frozen=True)
class BoundedInterval:
    """A unified interval [lower, upper] for μ ≥ 0 at confidence ``cl`` (same units as x)."""

    lower: float
    upper: float
    cl: float

    @property
    def reaches_zero(self) -> bool:
        return self.lower <= 0.0


def unified_interval(estimate: float, sigma: float, cl: float) -> BoundedInterval:
    """Feldman–Cousins interval for a Gaussian mean μ ≥ 0 from one estimate and its σ."""
    if not (math.isfinite(estimate) and math.isfinite(sigma) and sigma > 0):
        raise ValueError(f"unified interval: expected a finite estimate and σ > 0, found {sigma!r}")
    x0 = estimate / sigma

    def above_upper_edge(mu: float) -> float:  # x₁(μ) − x₀: the region leaves x₀ behind
        return acceptance_region(round(mu, 12), cl)[0] - x0

    def below_lower_edge(mu: float) -> float:  # x₂(μ) − x₀: the region has not reached x₀
        return acceptance_region(round(mu, 12), cl)[1] - x0

    if below_lower_edge(0.0) >= 0.0:
        lo = 0.0
    else:
        a, b = 0.0, max(x0, 1.0)
        while below_lower_edge(b) < 0.0:
            b *= 2.0
        lo = optimize.brentq(below_lower_edge, a, b, xtol=1e-10)
    a = max(lo, 0.0)
    b = max(x0, 0.0) + 1.0
    while above_upper_edge(b) < 0.0:
        b += 1.0
    if above_upper_edge(a) >= 0.0:
        hi = a
    else:
        hi = optimize.brentq(above_upper_edge, a, b, xtol=1e-10)
    return BoundedInterval(lo * sigma, hi * sigma, cl)
