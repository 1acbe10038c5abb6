"""Profile round trips behind a magnet (polarbeam.extraction.magnetic_profiles): resolved
Stern–Gerlach components (S = 1/2, 1, 3/2; g and S recovered) and superparamagnetic clusters (the
one-sided shift gives m). Poisson counts from the package's own models; pulls must be honest
(fraction with |pull| < 1 within 0.62–0.75). The models themselves are checked against closed
forms in tests/beam/test_beam_magnetic.py."""

from __future__ import annotations

import os

import numpy as np
import pytest
from scipy import constants as sc

from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.beam.magnetic import ELECTRON_G
from polarbeam.beam.magnetic_profiles import cluster_profile, spin_profile
from polarbeam.extraction.magnetic_profiles import (
    fit_cluster_profiles,
    fit_spin_profile,
    moment_muB,
)

MU_B = sc.physical_constants["Bohr magneton"][0]
FULL = os.environ.get("POLARBEAM_FULL_ROUNDTRIPS") == "1"
X = np.linspace(-6e-3, 6e-3, 81)
BW = X[1] - X[0]
V, WV = GaussianVelocity(600.0, 30.0).nodes(6)
KAPPA = 0.105 / (100 * sc.atomic_mass)  # 0.1 m magnet, 1 m drift, 100 u (m³/(N s²) · kg…)
GRAD = 100.0  # T/m


def _inside(p):
    return float(np.mean(np.abs(np.asarray(p)) < 1.0))


def test_component_positions_follow_the_force():
    # S = 1/2 at one velocity, no spread: two peaks at ±g μ_B G κ/(2 v²)
    dens = spin_profile(X, 0.5, 2.0, GRAD, KAPPA, [600.0], [1.0], 0.0, 1e-4)
    half = 2.0 * MU_B * GRAD * KAPPA / 600.0**2 / 2
    peaks = X[np.argsort(dens)[-2:]]
    assert sorted(np.abs(peaks)) == pytest.approx([half, half], abs=BW)
    assert np.sum(dens) * BW == pytest.approx(1.0, rel=1e-3)


def _spin_counts(rng, s):
    return rng.poisson(2e4 * BW * spin_profile(X, s, ELECTRON_G, GRAD, KAPPA, V, WV, 1e-4, 3e-4))


def test_spin_is_recovered_among_candidates():
    rng = np.random.default_rng(2423)
    for s in (0.5, 1.0, 1.5):
        for _ in range(8 if FULL else 3):
            fit = fit_spin_profile(X, _spin_counts(rng, s), GRAD, KAPPA, V, WV)
            assert fit.spin == s, fit.chi2_by_spin
            assert fit.chi2 / fit.ndof < 2.0


def test_spin_profile_round_trip():
    n = 200 if FULL else 60
    rng = np.random.default_rng(2424)
    pulls = []
    for s in (0.5, 1.0, 1.5):
        for _ in range(n):
            fit = fit_spin_profile(X, _spin_counts(rng, s), GRAD, KAPPA, V, WV, spins=(s,))
            pulls.append((fit.value - ELECTRON_G) / fit.error)
    assert 0.62 <= _inside(pulls) <= 0.75
    assert abs(np.mean(pulls)) < 3 / np.sqrt(len(pulls)) + 0.05


def test_cluster_profile_is_one_sided_and_round_trips():
    t, b, m_true = 50.0, 0.5, 30 * MU_B
    on = cluster_profile(X, m_true, b, GRAD, t, KAPPA, V, WV, 0.0, 3e-4)
    assert np.sum(X * on) * BW > 0  # towards strong field (+x)
    n = 400 if FULL else 160
    rng = np.random.default_rng(2425)
    pulls = []
    off_mu = 2e4 * BW * cluster_profile(X, 0.0, b, GRAD, t, KAPPA, V, WV, 0.0, 3e-4)
    for _ in range(n):
        c0 = rng.poisson(off_mu)
        c1 = rng.poisson(2e4 * BW * on)
        fit = fit_cluster_profiles(X, c0, c1, b, GRAD, t, KAPPA, V, WV, m0=20 * MU_B)
        m, dm = moment_muB(fit)
        pulls.append((m - 30.0) / dm)
    assert 0.62 <= _inside(pulls) <= 0.75
    assert abs(np.mean(pulls)) < 3 / np.sqrt(n) + 0.05
