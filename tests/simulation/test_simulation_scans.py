"""The raw-scan simulator (polarbeam.simulation.scans) against the fringe model and the reduction.

Outside references used below:

* The Poisson distribution: mean and variance both equal ``μ`` (any statistics textbook;
  ``scipy.stats.poisson`` is used for the stated values), so the mean of ``R`` independent draws
  has standard error ``sqrt(μ/R)``.
* The χ² distribution (``scipy.stats.chi2``): a sum of ``k`` squared standard normal deviates.
* The normal distribution (``scipy.stats.norm``): a correct pull is N(0, 1), ``P(|z| < 1) =
  0.6827``.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from polarbeam.reduction import INPUT_COLUMNS, fit_scans, reduce_table
from polarbeam.simulation.scans import fringe_counts, simulate_scan_table, simulate_series

PERIOD = 2.0e-7


def _wrap(phi):
    return np.pi - np.mod(np.pi - phi, 2 * np.pi)


def test_counts_follow_the_fringe_model_in_expectation():
    # The documented model 1 + V cos(2π(x - Δx)/d - φ0), written out here on its own: the phase
    # passed to the simulator is ψ = 2πΔx/d + φ0 (positive shift, positive phase).
    rng = np.random.default_rng(41)
    d, bins, reps = PERIOD, 24, 4000
    dx, phi0, signal, vis, dark = 0.13 * d, 0.4, 50.0, 0.35, 2.0
    x = np.arange(bins) * d / bins
    model = dark + signal * (1 + vis * np.cos(2 * np.pi * (x - dx) / d - phi0))
    psi = 2 * np.pi * dx / d + phi0
    mu, counts = fringe_counts(np.tile(x, (reps, 1)), d, psi, signal, vis, dark, rng)
    np.testing.assert_allclose(mu, np.broadcast_to(model, mu.shape), rtol=1e-12)
    assert np.all(counts == np.round(counts)) and np.all(counts >= 0)
    # Poisson: E[n] = μ, so the bin means are within sqrt(μ/R) of the model (χ² over the bins).
    z = (counts.mean(axis=0) - model) / np.sqrt(model / reps)
    assert stats.chi2.sf(np.sum(z**2), bins) > 1e-4  # scipy.stats.chi2
    # Poisson: Var[n] = μ (scipy.stats.poisson(μ).var() == μ).
    assert stats.poisson(model[0]).var() == pytest.approx(model[0])
    ratio = counts.var(axis=0, ddof=1) / model
    assert np.mean(ratio) == pytest.approx(1.0, abs=0.03)


def test_series_layout_and_truth():
    rng = np.random.default_rng(42)
    v = np.array([500.0, 1000.0, 1500.0, 2000.0, 2500.0])
    sim = simulate_series(1e-6 * v**2, v, rng=rng, bins=10, reference_every=2, first_scan=7)
    assert tuple(sim.table.columns) == INPUT_COLUMNS
    truth = sim.truth
    # R S S R S S R S R: references at both ends and after every two signals.
    assert list(truth["is_reference"]) == [
        True,
        False,
        False,
        True,
        False,
        False,
        True,
        False,
        True,
    ]
    assert list(truth["scan"]) == list(range(7, 16))
    assert (sim.table.groupby("scan").size() == 10).all()
    np.testing.assert_array_equal(truth.loc[~truth.is_reference, "voltage_V"], v)
    assert (truth.loc[truth.is_reference, ["voltage_V", "shift_rad"]] == 0).all().all()
    np.testing.assert_allclose(
        truth["measured_phase_rad"], truth["interferometer_phase_rad"] + truth["shift_rad"]
    )
    assert np.all(np.diff(truth["time_s"]) > 0)


@pytest.fixture(scope="module")
def campaign():
    rng = np.random.default_rng(43)
    volts = np.array([600.0, 1200.0, 1800.0])
    specs = []
    for i in range(60):  # 12 signal scans and 7 references per series
        v = rng.permutation(np.tile(volts, 4))
        specs.append(dict(shifts_rad=4e-7 * v**2, voltages_V=v, compound=f"sim-{i:02d}"))
    return simulate_scan_table(
        specs, rng=rng, signal_per_bin=80.0, dark_per_bin=1.0, visibility=0.3, bins=32
    )


def test_fitted_phases_recover_the_simulated_phases(campaign):
    # Per-scan fits against the simulated measured phase (interferometer + shift).
    truth = campaign.truth.set_index("scan")
    table = campaign.table
    fit = fit_scans(table["scan"], table["position_m"], table["counts"], PERIOD)
    assert fit.ok.all()
    z = _wrap(fit.phase - truth.loc[fit.scan, "measured_phase_rad"].to_numpy()) / fit.phase_err
    within_1 = stats.norm.cdf(1) - stats.norm.cdf(-1)  # 0.6827 (scipy.stats.norm)
    assert z.size == 60 * 19
    assert abs(z.mean()) < 4 / math.sqrt(z.size)
    assert z.std() == pytest.approx(1.0, abs=0.07)
    assert np.mean(np.abs(z) < 1) == pytest.approx(within_1, abs=0.05)
    # The fitted visibility is the simulated one diluted by the dark counts.
    observed = truth["observed_visibility"].iloc[0]
    assert fit.visibility.mean() == pytest.approx(
        observed, abs=4 * fit.visibility.std() / math.sqrt(fit.visibility.size)
    )


def test_reduced_phases_recover_the_simulated_shifts(campaign):
    # Drift-corrected phases against the simulated deflection shifts: each marginal pull is
    # N(0, 1); pulls within a series are correlated, so the mean is tested per series count.
    red = reduce_table(campaign.table, PERIOD)
    truth = campaign.truth.set_index("scan")
    t = red.table
    assert t["phase_rad"].notna().all()
    z = (t["phase_rad"] - truth.loc[t["scan"], "shift_rad"].to_numpy()) / t["phase_err_rad"]
    assert z.size == 60 * 12
    assert abs(z.mean()) < 4 / math.sqrt(60)
    assert z.std() == pytest.approx(1.0, abs=0.1)
