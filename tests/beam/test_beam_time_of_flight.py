"""Time of flight: the forward model of a gated trace and the Poisson fit.

The closed-form bin probabilities are checked against an independent numerical integration
(``scipy.integrate.quad`` of the detected distribution times the overlap of the bin with the
gate-shifted arrival window, evaluated in velocity), and against a Monte Carlo of molecules
passing a rectangular gate; the shape's moments against ``scipy.integrate.quad``.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import uncertainties
from scipy import integrate, stats

from polarbeam.beam.time_of_flight import (
    FluxShape,
    TraceSetup,
    bin_probabilities,
    expected_counts,
    fit_trace,
    flight_time_estimate,
    mean_inverse_square_uncertain,
    tabulate,
)

SETUP = TraceSetup(1.25, 20e-6, 3e-6)
WIDTH = 10e-6
STARTS = np.arange(0.0, 4e-3, WIDTH)


def _quad_bin(shape: FluxShape, setup: TraceSetup, start: float, width: float) -> float:
    """∫ D(v) |[start, start+width) ∩ [t₀ + L/v, t₀ + L/v + gate)| / gate dv by adaptive quadrature
    (scipy.integrate.quad), split at the velocities where the overlap changes slope."""
    a = start - setup.time_offset
    length, gate = setup.flight_length, setup.gate

    def overlap(v):
        t = length / v
        return max(0.0, min(a + width, t + gate) - max(a, t)) / gate

    lo, hi = shape.support(10.0)
    lo = max(lo, 1e-6)
    cuts = sorted(
        length / x
        for x in (a, a + width, a - gate, a + width - gate)
        if x > 0 and lo < length / x < hi
    )
    return integrate.quad(
        lambda v: float(shape.density(v)) * overlap(v),
        lo,
        hi,
        points=cuts or None,
        limit=400,
        epsabs=1e-14,
        epsrel=1e-11,
    )[0]


@pytest.mark.parametrize(
    "shape", [FluxShape(800.0, 90.0), FluxShape(0.0, 450.0), FluxShape(500.0, 300.0)]
)
def test_bin_probabilities_match_quadrature(shape):
    p = bin_probabilities(shape, SETUP, STARTS, WIDTH)
    peak = int(np.argmax(p))
    for j in (peak - 40, peak - 7, peak, peak + 3, peak + 25, peak + 90):
        if 0 <= j < p.size:
            assert p[j] == pytest.approx(
                _quad_bin(shape, SETUP, STARTS[j], WIDTH), rel=1e-8, abs=1e-13
            )


def test_bins_sum_to_one_when_the_trace_holds_every_arrival():
    long = np.arange(0.0, 12e-3, WIDTH)  # every arrival up to v ≈ 100 m/s (u − 6a)
    p = bin_probabilities(FluxShape(700.0, 100.0), SETUP, long, WIDTH)
    assert p.sum() == pytest.approx(1.0, abs=1e-9)  # F₂ differences: rounding ~1e-11
    # a gate as long as a bin, offset by a whole bin: the same probabilities one bin later
    s1 = TraceSetup(1.25, 20e-6, 0.0)
    s2 = TraceSetup(1.25, 20e-6, WIDTH)
    p1 = bin_probabilities(FluxShape(700.0, 100.0), s1, STARTS, WIDTH)
    p2 = bin_probabilities(FluxShape(700.0, 100.0), s2, STARTS, WIDTH)
    np.testing.assert_allclose(p2[1:], p1[:-1], rtol=1e-7, atol=1e-13)


def test_forward_model_matches_a_monte_carlo_of_gated_molecules():
    # molecules: v from D(v) (inverse CDF on the exact survival function), gate time τ uniform
    # on [0, gate], arrival t = τ + L/v + t₀; the histogram follows the model (χ² test, scipy)
    rng = np.random.default_rng(5)
    shape = FluxShape(600.0, 150.0)
    grid = np.linspace(*shape.support(9.0), 20001)
    cdf = 1.0 - shape.survival(grid)
    v = np.interp(rng.random(400_000), cdf, grid)
    t = rng.uniform(0.0, SETUP.gate, v.size) + SETUP.flight_length / v + SETUP.time_offset
    counts, _ = np.histogram(t, bins=np.append(STARTS, STARTS[-1] + WIDTH))
    mu = v.size * bin_probabilities(shape, SETUP, STARTS, WIDTH)
    sel = mu > 20
    chi2 = float(np.sum((counts[sel] - mu[sel]) ** 2 / mu[sel]))
    assert stats.chi2.sf(chi2, int(sel.sum())) > 1e-3


@pytest.mark.parametrize("shape", [FluxShape(800.0, 90.0), FluxShape(0.0, 450.0)])
def test_shape_moments_match_quadrature(shape):
    lo, hi = shape.support(10.0)
    for k in (-2, -1, 1, 2):
        ref = integrate.quad(
            lambda v, k=k: float(shape.density(v)) * v**k,
            max(lo, 1e-9),
            hi,
            points=[shape.u] if shape.u > lo else None,
            limit=200,
        )[0]
        assert shape.moment(k) == pytest.approx(ref, rel=1e-9)
    assert integrate.quad(shape.density, max(lo, 1e-9), hi, limit=200)[0] == pytest.approx(
        1.0, rel=1e-9
    )


def test_tabulated_nodes_keep_the_inverse_square_moment():
    for shape in (FluxShape(800.0, 90.0), FluxShape(0.0, 450.0)):
        v, w = tabulate(shape, 120)
        assert w.sum() == pytest.approx(1.0, abs=1e-14)
        assert np.all(w >= 0) and np.all(v > 0)
        assert np.sum(w / v**2) == pytest.approx(shape.moment(-2), rel=1e-9)
        # nodes keep ⟨v⁻²⟩ exactly; the mean only to the cell width (0.07 % for 120 cells)
        assert np.sum(w * v) == pytest.approx(shape.moment(1), rel=2e-3)


def test_fit_recovers_the_shape_of_a_rich_trace():
    rng = np.random.default_rng(11)
    truth = FluxShape(750.0, 110.0)
    n = rng.poisson(expected_counts(truth, SETUP, STARTS, WIDTH, 2e5, 3.0))
    fit = fit_trace(SETUP, STARTS, n, WIDTH)
    err = np.sqrt(np.diag(fit.covariance))
    for got, want, e in zip(fit.parameters, (750.0, 110.0, 2e5, 3.0), err, strict=True):
        assert abs(got - want) < 4 * e
    assert stats.chi2.sf(fit.deviance, fit.ndof) > 1e-3


def test_flight_length_and_offset_propagate_exactly():
    rng = np.random.default_rng(3)
    fit = fit_trace(
        SETUP,
        STARTS,
        rng.poisson(expected_counts(FluxShape(700.0, 100.0), SETUP, STARTS, WIDTH, 5e4, 1.0)),
        WIDTH,
    )
    length = uncertainties.ufloat(1.25, 0.002, tag="L")
    offset = uncertainties.ufloat(SETUP.time_offset, 2e-6, tag="t0")
    m2 = mean_inverse_square_uncertain(fit, length, offset, "fit")
    comps = {v.tag: c for v, c in m2.error_components().items() if v.tag in ("L", "t0")}
    nominal = fit.shape.moment(-2)
    assert m2.nominal_value == pytest.approx(nominal, rel=1e-12)
    # ⟨v⁻²⟩ ∝ L⁻² exactly (v = L/T): the relative error is twice that of L
    assert comps["L"] / nominal == pytest.approx(2 * 0.002 / 1.25, rel=1e-9)
    # T → T − δ: d⟨v⁻²⟩/dδ = −2⟨T⟩/L² = −2⟨v⁻¹⟩/L
    assert comps["t0"] == pytest.approx(2 * fit.shape.moment(-1) / 1.25 * 2e-6, rel=1e-6)


def test_flight_time_estimate_from_the_centroid():
    shape = FluxShape(700.0, 60.0)
    mu = expected_counts(shape, SETUP, STARTS, WIDTH, 1e6)
    est = flight_time_estimate(STARTS, mu, WIDTH, SETUP.gate, SETUP.time_offset)
    assert est == pytest.approx(1.25 * shape.moment(-1), rel=1e-6)
    assert math.isnan(flight_time_estimate(STARTS, np.zeros_like(STARTS), WIDTH, 1e-5, 0.0))
