"""Series fit of the extraction stage against independent closed forms."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.beam.velocity import mean_inverse_square
from polarbeam.constants import AMU, ANGSTROM3_SI
from polarbeam.contract.campaign import SeriesData
from polarbeam.extraction.series import fit_series, observable_model
from polarbeam.quantities import Measured

ALPHA = 23.7 * ANGSTROM3_SI  # C·m²/V
COUPLING = 1.3e7  # layout scale × field integral, V⁻²·m·(m²/s²)·kg per C·m²/V (test value)
MASS = 312.4 * AMU
V_MEAN = 215.0  # m/s


def _series(values, voltages, errors, spread=0.0):
    n = voltages.size
    return SeriesData(
        compound="test-compound",
        temperature=Measured(450.0, 1.0),
        velocity=Measured(V_MEAN, 2.0),
        velocities=np.full(n, V_MEAN),
        spreads=np.full(n, spread),
        voltages=voltages,
        values=values,
        errors=errors,
        lines=tuple(range(2, n + 2)),
    )


@pytest.mark.parametrize("fit_offset", [False, True])
def test_monochromatic_beam_profile_recovers_alpha(fit_offset):
    # Independent closed form: Δx = α·C·V²/(m v²) for a single velocity (the deflection of a
    # monochromatic beam, textbook impulse approximation); built here without observable_model.
    voltages = np.linspace(0.0, 12e3, 9)
    shift = ALPHA * COUPLING * voltages**2 / (MASS * V_MEAN**2)
    offset = 3.0e-6 if fit_offset else 0.0
    errors = np.full(voltages.size, 0.02 * shift.max())
    fit = fit_series(
        _series(shift + offset, voltages, errors),
        COUPLING,
        MASS,
        "beam-profile",
        fit_offset=fit_offset,
    )
    assert abs(fit.alpha_si / ALPHA - 1) < 1e-9
    assert abs(fit.offset - offset) < 1e-9 * shift.max()
    assert fit.chi2 < 1e-12
    # a 1 % different α must be visible in the same comparison (the check can fail)
    n = voltages.size
    model_off, _ = observable_model(
        1.01 * ALPHA, voltages, COUPLING / MASS, np.full(n, V_MEAN), np.zeros(n), "beam-profile"
    )
    assert not np.allclose(model_off, shift, rtol=1e-9, atol=0)


def _gauss_inverse_square_quad(u: float, s: float) -> float:
    """⟨v⁻²⟩ = ∫ N(v; u, s) v⁻² dv by adaptive quadrature (scipy.integrate.quad), independent
    of the Gauss–Hermite nodes used by the package.  Integrated over u ± 8s with s/u ≤ 0.1: the
    tails beyond contribute < 1e-12 relative (Gaussian tail bound e^{-32}·(u/0.2u)²)."""
    assert s / u <= 0.1
    pdf = stats.norm(u, s).pdf
    lo, hi = u - 8 * s, u + 8 * s
    num, _ = integrate.quad(lambda v: pdf(v) / v**2, lo, hi, points=[u], epsabs=0, epsrel=1e-13)
    den, _ = integrate.quad(pdf, lo, hi, points=[u], epsabs=0, epsrel=1e-13)
    return num / den


@pytest.mark.parametrize("u,s", [(215.0, 10.0), (215.0, 21.5), (400.0, 20.0)])
def test_gauss_hermite_mean_inverse_square_matches_quad(u, s):
    ref = _gauss_inverse_square_quad(u, s)
    assert abs(mean_inverse_square(GaussianVelocity(u, s)) / ref - 1) < 1e-8
    # the model's beam-profile observable is κ⟨v⁻²⟩
    kappa = ALPHA * COUPLING / MASS * 5e3**2
    out, mod = observable_model(
        ALPHA, np.array([5e3]), COUPLING / MASS, np.array([u]), np.array([s]), "beam-profile"
    )
    assert abs(out[0] / (kappa * ref) - 1) < 1e-8
    assert mod[0] == 1.0
    # and it is not the naive 1/u² (the spread matters at this level)
    assert abs(ref * u**2 - 1) > 1e-3
    # small-spread check against the series expansion 1/u²·(1 + 3 s²/u² + 15 s⁴/u⁴ + …)
    # (moments of a Gaussian, any statistics textbook) — only where it converges fast
    if s / u < 0.06:
        series = (1 + 3 * (s / u) ** 2 + 15 * (s / u) ** 4 + 105 * (s / u) ** 6) / u**2
        assert math.isclose(ref, series, rel_tol=1e-6)
