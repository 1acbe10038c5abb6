"""Velocity distributions: the Gaussian rule, the flux forms and measured tables.

Independent references: ``scipy.integrate.quad`` of the stated densities (the Gaussian truncated
at v > 0.02·v̄, the flux form v³·exp(−(v − u)²/a²)), and closed-form moments of the effusive form
(Γ-function integrals: ⟨v⟩ = a·Γ(5/2)/Γ(2), ⟨v²⟩ = a²·Γ(3)/Γ(2), textbook).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, special, stats

from polarbeam.beam.distributions import (
    EFFUSIVE_SPREAD_RATIO,
    GAUSSIAN_CUT,
    FluxVelocity,
    GaussianVelocity,
    TabulatedVelocity,
    VelocityDistribution,
    distribution_from_moments,
)
from polarbeam.beam.velocity import averaged_phasor_phase, mean_inverse_square

NODE_COUNTS = (4, 5, 16, 48, 100, 371, 372, 400)


def _truncated_gaussian_inverse_square(ratio: float) -> float:
    """⟨v⁻²⟩·v̄² of the Gaussian truncated at v > 0.02 v̄, by scipy.integrate.quad."""
    lo = max(GAUSSIAN_CUT, 1 - 12 * ratio)
    pts = [min(2 * GAUSSIAN_CUT, 1.0), 1.0] if lo == GAUSSIAN_CUT else [1.0]
    num = integrate.quad(
        lambda v: stats.norm.pdf(v, 1, ratio) / v**2,
        lo,
        1 + 12 * ratio,
        points=pts,
        limit=1000,
        epsabs=0,
        epsrel=1e-12,
    )[0]
    den = integrate.quad(
        lambda v: stats.norm.pdf(v, 1, ratio), lo, 1 + 12 * ratio, epsabs=0, epsrel=1e-12
    )[0]
    return num / den


@pytest.mark.parametrize("ratio", [0.01, 0.05, 0.1, 0.15, 0.2, 0.25])
def test_gaussian_inverse_square_does_not_depend_on_the_node_count(ratio):
    values = [mean_inverse_square(GaussianVelocity(300.0, ratio * 300.0), n) for n in NODE_COUNTS]
    assert max(values) / min(values) - 1 < 1e-6
    exact = _truncated_gaussian_inverse_square(ratio) / 300.0**2
    assert values[0] == pytest.approx(exact, rel=1e-6)


@pytest.mark.parametrize("ratio", [0.3, 0.4, 0.6])
def test_broad_gaussian_gives_the_exact_truncated_value(ratio):
    exact = _truncated_gaussian_inverse_square(ratio)
    for n in NODE_COUNTS:
        got = mean_inverse_square(GaussianVelocity(1.0, ratio), n)
        assert got == pytest.approx(exact, rel=1e-6)
    if ratio == 0.3:  # the value quoted in the issue (σ/v̄ = 0.3, cut at 0.02 v̄)
        assert exact == pytest.approx(1.8778, abs=1e-4)


def test_no_overflow_and_at_least_the_requested_nodes():
    for n in range(4, 401, 33):
        v, w = GaussianVelocity(200.0, 60.0).nodes(n)
        assert v.size >= n and np.all(np.isfinite(v)) and np.all(np.isfinite(w))
        assert np.all(v > GAUSSIAN_CUT * 200.0) and w.sum() == pytest.approx(1.0, abs=1e-13)


def test_flux_form_matches_its_moments_and_quad():
    for ratio in (0.02, 0.1, 0.2, 0.3, 0.36):
        d = FluxVelocity(500.0, ratio * 500.0)
        u, a = d.parameters()
        v, w = d.nodes(48)
        m = np.sum(w * v)
        assert m == pytest.approx(500.0, rel=1e-10)
        assert math.sqrt(np.sum(w * v**2) - m**2) == pytest.approx(ratio * 500.0, rel=1e-9)

        def flux(x, u=u, a=a):
            return x**3 * np.exp(-(((x - u) / a) ** 2))

        top = u + 20 * a
        z = integrate.quad(flux, 0, top, points=[u], limit=500)[0]
        ref = integrate.quad(lambda x: flux(x) / x**2, 0, top, points=[u], limit=500)[0] / z
        for n in (4, 48, 400):
            assert mean_inverse_square(d, n) == pytest.approx(ref, rel=1e-9)


def test_effusive_ratio_is_the_gamma_function_value():
    # ⟨v⟩ = a Γ(5/2)/Γ(2), ⟨v²⟩ = a² Γ(3)/Γ(2) for v³ exp(−v²/a²)
    mean = special.gamma(2.5)
    rms2 = special.gamma(3.0)
    assert EFFUSIVE_SPREAD_RATIO == pytest.approx(math.sqrt(rms2 - mean**2) / mean, rel=1e-12)
    d = distribution_from_moments("effusive", 300.0, 0.0)
    v, w = d.nodes(48)
    assert np.sum(w * v) == pytest.approx(300.0, rel=1e-10)
    # an effusive beam moment-matched by a Gaussian overstates ⟨v⁻²⟩ (the issue: ~47 %)
    gauss = mean_inverse_square(GaussianVelocity(300.0, EFFUSIVE_SPREAD_RATIO * 300.0))
    assert gauss / mean_inverse_square(d) > 1.3


def test_supersonic_spread_beyond_the_effusive_limit_is_refused():
    with pytest.raises(ValueError, match=r"expected a supersonic spread below 0\.3630"):
        FluxVelocity(300.0, 120.0)


def test_table_is_its_classes_with_contrast_and_scale():
    t = TabulatedVelocity.from_arrays([250.0, 150.0], [7.0, 3.0], [1.0, 0.5], scale=1.1)
    assert isinstance(t, VelocityDistribution)
    v, w = t.nodes(48)
    assert v == pytest.approx([165.0, 275.0]) and w == pytest.approx([0.3, 0.7])
    assert t.contrast(48) == pytest.approx([0.5, 1.0])
    assert t.mean == pytest.approx(1.1 * (0.3 * 150 + 0.7 * 250))
    # each class is a bin reaching halfway to its neighbour (165 | 220 | 275 m/s, the end bins as
    # wide on their outer side: 110–220 and 220–330 m/s), its phase averaged over the bin's span
    # Δu in 1/v²: e^{iκu}·sin(κΔu/2)/(κΔu/2)
    du = np.array([1 / 110.0**2 - 1 / 220.0**2, 1 / 220.0**2 - 1 / 330.0**2])
    assert t.spans() == pytest.approx(du, rel=1e-12)
    kappa = np.array([2.0e3])
    x = kappa[0] * du / 2
    z = (
        0.3 * 0.5 * np.exp(1j * kappa / 165.0**2) * np.sin(x[0]) / x[0]
        + 0.7 * np.exp(1j * kappa / 275.0**2) * np.sin(x[1]) / x[1]
    )
    phase, modulus = averaged_phasor_phase(kappa, t)
    assert phase == pytest.approx(np.angle(z), abs=1e-12)
    assert modulus == pytest.approx(np.abs(z), rel=1e-12)
    assert t.scaled(2.0).mean == pytest.approx(2 * t.mean)
    assert t.weights == (3.0, 7.0)  # sorted with their velocities


@pytest.mark.parametrize(
    ("v", "w", "match"),
    [
        ([100.0, 200.0], [1.0, -1.0], "expected weights >= 0, found -1"),
        ([100.0, 100.0], [1.0, 1.0], "expected at least two different velocities, found 1"),
        ([0.0, 200.0], [1.0, 1.0], "expected velocities > 0 m/s, found 0"),
        ([100.0, 200.0], [0.0, 0.0], "expected at least one weight > 0"),
    ],
)
def test_bad_tables_are_refused(v, w, match):
    with pytest.raises(ValueError, match=match):
        TabulatedVelocity.from_arrays(v, w)
