"""Velocity averaging against independent integrals."""

import math

import numpy as np
from scipy import integrate, stats

from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.beam.velocity import averaged_phasor_phase, mean_inverse_square


def _gauss_avg(f, v0, s):
    pdf = stats.norm(v0, s).pdf
    lo, hi = max(1e-9, v0 - 9 * s), v0 + 9 * s
    num, _ = integrate.quad(lambda v: f(v) * pdf(v), lo, hi, limit=200)
    den, _ = integrate.quad(pdf, lo, hi)
    return num / den


def test_mean_inverse_square_against_quadrature():
    for v0, s in [(200.0, 20.0), (150.0, 22.5), (300.0, 3.0)]:
        ref = _gauss_avg(lambda v: v**-2, v0, s)
        assert math.isclose(mean_inverse_square(GaussianVelocity(v0, s)), ref, rel_tol=1e-6)
    # series expansion ⟨v⁻²⟩ ≈ (1 + 3ε²)/v0² (ε = σ/v0), standard moment result
    assert math.isclose(
        mean_inverse_square(GaussianVelocity(100.0, 1.0)), (1 + 3e-4) / 1e4, rel_tol=1e-6
    )


def test_phasor_average_against_quadrature_and_continuity():
    v0, s = 200.0, 24.0
    kap = np.linspace(0, 6.0 * v0**2, 25)  # phases up to ~6 rad: beyond π, so unwrapping matters
    ph, mod = averaged_phasor_phase(kap, GaussianVelocity(v0, s))
    for k, p, m in zip(kap[1::6], ph[1::6], mod[1::6], strict=True):
        re = _gauss_avg(lambda v, k=k: math.cos(k / v**2), v0, s)
        im = _gauss_avg(lambda v, k=k: math.sin(k / v**2), v0, s)
        assert math.isclose(m, math.hypot(re, im), rel_tol=1e-5, abs_tol=1e-7)
        assert math.isclose(math.remainder(p - math.atan2(im, re), 2 * math.pi), 0, abs_tol=1e-5)
    assert np.all(np.diff(ph) > 0)  # continuous and monotonic: no 2π wraps
    assert ph[-1] > math.pi
    # odd in κ
    ph2, _ = averaged_phasor_phase(-kap, GaussianVelocity(v0, s))
    np.testing.assert_allclose(ph2, -ph)


def test_naive_mean_velocity_is_biased_by_spread():
    # A 10 % spread changes ⟨v⁻²⟩ by ~3 %: the analysis must not use 1/⟨v⟩².
    assert mean_inverse_square(GaussianVelocity(200.0, 20.0)) * 200.0**2 > 1.029
