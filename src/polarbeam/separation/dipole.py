"""What the data say about the dipole: unified intervals for ⟨μ²⟩ ≥ 0, then μ = √⟨μ²⟩.

The slope of the Debye line gives ⟨μ²⟩ with a Gaussian error from the full correlated covariance
(the intercept is profiled: the line is linear in both). The Feldman–Cousins construction
(:mod:`polarbeam.separation.intervals`) turns it into intervals that respect ⟨μ²⟩ ≥ 0 and keep
their coverage whatever the true dipole; μ's interval is the square root of ⟨μ²⟩'s (a monotonic
map keeps the coverage). The decision "value or upper limit" is no longer made from the data:

* the 68.3 % interval [μ_lo, μ_hi] is always reported;
* when the 95 % interval (``limit_cl``) excludes zero, μ is quoted as the bounded maximum
  likelihood √max(⟨μ²⟩, 0) with the half width of the 68.3 % interval as its error;
* when it reaches zero, the statement is an upper limit: the 95 % interval's upper edge.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from uncertainties import UFloat, ufloat, umath

from polarbeam.separation.intervals import unified_interval

__all__ = ["INTERVAL_CL", "LIMIT_CL", "DipoleStatement", "dipole_statement"]

#: Confidence level of the two-sided interval [μ_lo, μ_hi] (one Gaussian standard error).
INTERVAL_CL = 0.6827
#: Confidence level of the limit, and of the test whether zero is excluded.
LIMIT_CL = 0.95


@dataclass(frozen=True)
class DipoleStatement:
    """μ (C·m) from ⟨μ²⟩: interval, value or upper limit, and the confidence levels used."""

    lower: float  # μ_lo of the INTERVAL_CL interval
    upper: float  # μ_hi of the INTERVAL_CL interval
    value: UFloat | None  # bounded ML μ ± half width, when the LIMIT_CL interval excludes 0
    limit: float | None  # upper edge of the LIMIT_CL interval, when it reaches 0
    interval_cl: float
    limit_cl: float


def dipole_statement(
    mu2: UFloat, interval_cl: float = INTERVAL_CL, limit_cl: float = LIMIT_CL
) -> DipoleStatement:
    """The dipole statement of an uncertain ⟨μ²⟩ (C²·m²) with its correlated error budget.

    The value keeps the budget of the linearised √⟨μ²⟩ (the share of each input), scaled so its
    standard error is the half width of the unified interval.
    """
    m, s = float(mu2.nominal_value), float(mu2.std_dev)
    if not s > 0:  # exactly known (no stated errors): nothing to construct
        mu = math.sqrt(max(m, 0.0))
        return DipoleStatement(mu, mu, mu2**0.5 if m > 0 else None, None, interval_cl, limit_cl)
    inner = unified_interval(m, s, interval_cl)
    outer = unified_interval(m, s, limit_cl)
    lo, hi = math.sqrt(inner.lower), math.sqrt(inner.upper)
    if outer.reaches_zero:
        return DipoleStatement(lo, hi, None, math.sqrt(outer.upper), interval_cl, limit_cl)
    mu_hat = math.sqrt(max(m, 0.0))
    linear = umath.sqrt(mu2) if m > 0 else None
    half = 0.5 * (hi - lo)
    if linear is None or linear.std_dev == 0:
        value = ufloat(mu_hat, half, tag="dipole interval")
    else:
        value = mu_hat + (linear - linear.nominal_value) * (half / linear.std_dev)
    return DipoleStatement(lo, hi, value, None, interval_cl, limit_cl)
