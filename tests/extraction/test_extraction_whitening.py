"""Whitening of correlated phases: the banded factorisation of a long series.

Checks: the banded Cholesky route (scipy.linalg.cholesky_banded) agrees with the dense one
(scipy.linalg.cholesky) to rounding; independent points reduce to r/σ; a long raw-scan series
goes from the reduction to its fitted α_eff without ever allocating an n×n matrix (tracemalloc
peak far below the n² floats a dense covariance of 20,000 phases would need, 3.2 GB).
"""

from __future__ import annotations

import tracemalloc

import numpy as np
import pytest
from scipy import linalg, sparse

from polarbeam.contract.scans import series_from_reduction
from polarbeam.extraction.series import fit_series
from polarbeam.extraction.whitening import bandwidth, whitener
from polarbeam.reduction import reduce_table
from polarbeam.simulation.scans import simulate_scan_table


def _banded_covariance(n: int, rng) -> sparse.csr_matrix:
    """Shared-reference structure: pairs of neighbouring phases share a reference."""
    diag = rng.uniform(0.5, 1.5, n) ** 2
    off = 0.3 * np.sqrt(diag[:-1] * diag[1:]) * (np.arange(n - 1) % 2 == 0)
    off2 = 0.1 * np.sqrt(diag[:-2] * diag[2:])
    return sparse.diags([off2, off, diag, off, off2], [-2, -1, 0, 1, 2], format="csr")


def test_banded_and_dense_factorisations_agree():
    rng = np.random.default_rng(4)
    cov = _banded_covariance(3000, rng)
    assert bandwidth(cov) == 2
    r = rng.standard_normal((3000, 3))
    banded = whitener(cov, None, dense_limit=100)(r)
    chol = linalg.cholesky(cov.toarray(), lower=True)
    dense = linalg.solve_triangular(chol, r, lower=True)
    np.testing.assert_allclose(banded, dense, rtol=1e-12, atol=1e-12)
    # whitened residuals have unit covariance: rᵀC⁻¹r is the same either way
    assert float(np.sum(banded[:, 0] ** 2)) == pytest.approx(
        float(r[:, 0] @ np.linalg.solve(cov.toarray(), r[:, 0])), rel=1e-10
    )


def test_independent_points_are_divided_by_their_errors():
    err = np.array([0.5, 2.0, 4.0])
    white = whitener(None, err)
    np.testing.assert_allclose(white(np.array([1.0, 1.0, 1.0])), [2.0, 0.5, 0.25])
    np.testing.assert_allclose(white(np.ones((3, 2)))[:, 1], [2.0, 0.5, 0.25])


def test_a_covariance_that_is_not_positive_definite_is_refused():
    cov = sparse.diags([np.ones(5000), 2.0 * np.ones(4999), 2.0 * np.ones(4999)], [0, 1, -1])
    with pytest.raises(np.linalg.LinAlgError):
        whitener(cov.tocsr(), None)


@pytest.mark.slow
def test_a_long_series_is_never_made_dense():
    n_sig = 20_000  # signal scans; with a reference every 2 scans: 30,001 scans in one series
    rng = np.random.default_rng(23)
    volts = np.resize(np.array([500.0, 1000.0, 1500.0, 2000.0]), n_sig)
    sim = simulate_scan_table(
        [dict(shifts_rad=3e-7 * volts**2, voltages_V=volts, compound="long", temperature_K=300.0)],
        rng=rng,
        bins=12,
        signal_per_bin=200.0,
        dark_per_bin=1.0,
        drift_rad_s=1e-3,
        random_walk_rad2_s=1e-4,
        reference_every=2,
    )
    tracemalloc.start()
    try:
        red = reduce_table(sim.table, 2.0e-7, source="long.parquet")
        series, problems, _ = series_from_reduction(red)
        (s,) = series["long"]
        assert sparse.issparse(s.covariance)
        fit = fit_series(s, 1.0e20, 1.0e-24, "talbot-lau")
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    n = s.values.size
    assert n > 19_000 and not problems
    assert np.isfinite(fit.alpha_si) and fit.covariance[0, 0] > 0
    # a dense n×n float64 matrix alone would be n² × 8 bytes (≈ 3 GB here)
    assert peak < 0.1 * 8 * n * n, f"peak {peak / 1e6:.0f} MB"
