"""Whole deflection profiles of rigid rotors: Poisson fit of μ and the rotational temperature.

Profiles are simulated here from the same model (polarbeam.beam.rotors.profiles: Stark states of
the rotor, checked against textbook formulas in tests/beam/test_beam_rotors.py) with Poisson
counts, and fitted back: the pulls of μ and T_rot must be honest. The speed of one such fit (a
15 K linear rotor, 5 voltages × 200 bins; target < 10 s on 2 cores) is measured by
benchmarks/bench_profile_fit.py in a fresh process, never here.
"""

from __future__ import annotations

import os

import numpy as np
import pytest

from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.beam.rotors import LinearRotor, SymmetricTop
from polarbeam.beam.rotors.profiles import expected_counts, reweighted_populations
from polarbeam.constants import alpha_si_from_a3, debye_from_si, si_from_debye
from polarbeam.errors import CompoundError
from polarbeam.extraction.profiles import Profile, ProfileSeries, fit_profiles, profile_moments

FPV = 500.0  # E/V at the beam (1/m)
COM = 7.2e29  # coupling / mass
VOLTS = (0.0, 5e3, 10e3, 15e3, 20e3)
X = np.linspace(-1.5e-3, 1.5e-3, 200)


def _simulate(rng, response, mu_d, t_rot, alpha_a3=8.0, velocity=600.0, spread=30.0):
    mu, alpha = si_from_debye(mu_d), alpha_si_from_a3(alpha_a3)
    v, wv = GaussianVelocity(velocity, spread).nodes(24)
    bw = X[1] - X[0]
    profiles = []
    for volt in VOLTS:
        if volt == 0.0:
            m = expected_counts(X, bw, 20e-6, 110e-6, 2.0, 3e4)
        else:
            field = FPV * volt
            st = response.states(mu, 1.5 * t_rot, field)
            pop = reweighted_populations(st, 1.5 * t_rot, t_rot)
            kappa = (alpha + st.mu_eff / field) * COM * volt**2
            m = expected_counts(
                X, bw, 20e-6, 110e-6, 2.0, 3e4, kappa[:, None] / v**2, pop[:, None] * wv
            )
        profiles.append(Profile(volt, X, rng.poisson(m).astype(float)))
    return ProfileSeries("sim @ 300 K", velocity, spread, tuple(profiles))


def test_profile_fit_linear_rotor_15_k():
    rng = np.random.default_rng(3)
    rotor = LinearRotor(5000e6)
    s = _simulate(rng, rotor, 1.5, 15.0)
    fit = fit_profiles(
        [s], rotor, COM, FPV, alpha_known=alpha_si_from_a3(8.0), dipole_guess=si_from_debye(1.0)
    )
    mu = debye_from_si(fit.dipole)
    assert abs(mu - 1.5) < 4 * debye_from_si(fit.dipole_err)
    assert abs(fit.rotational_k[0] - 15.0) < 4 * fit.rotational_err_k[0]
    assert fit.deviance / fit.ndof == pytest.approx(1.0, abs=0.3)


@pytest.mark.slow
def test_profile_round_trip_pulls_linear_and_symmetric():
    """8 fits. By default linear rotors only (about 3 s a fit); the symmetric-top cases take
    minutes a fit (a cold symmetric top has many Stark blocks), so they join with
    ``POLARBEAM_FULL_ROUNDTRIPS=1``."""
    rng = np.random.default_rng(11)
    pulls_mu, pulls_t = [], []
    linear = [(LinearRotor(5000e6), 1.5, 4.0), (LinearRotor(5000e6), 1.5, 12.0)]
    symmetric = [
        (SymmetricTop(6000e6, 2500e6, 2500e6), 2.0, 3.0),
        (SymmetricTop(6000e6, 2500e6, 2500e6), 2.0, 8.0),
    ]
    cases = (linear + symmetric) * 2 if os.environ.get("POLARBEAM_FULL_ROUNDTRIPS") else linear * 4
    for rotor, mu_d, t_rot in cases:
        s = _simulate(rng, rotor, mu_d, t_rot)
        fit = fit_profiles(
            [s],
            rotor,
            COM,
            FPV,
            alpha_known=alpha_si_from_a3(8.0),
            dipole_guess=si_from_debye(1.0),
            rotational_guess_k=6.0,
            nodes=8,
        )
        pulls_mu.append((debye_from_si(fit.dipole) - mu_d) / debye_from_si(fit.dipole_err))
        pulls_t.append((fit.rotational_k[0] - t_rot) / fit.rotational_err_k[0])
    pulls_mu, pulls_t = np.array(pulls_mu), np.array(pulls_t)
    print("μ pulls", np.round(pulls_mu, 2), "T_rot pulls", np.round(pulls_t, 2))
    for p in (pulls_mu, pulls_t):  # 8 fits: mean within ~2.5/√8, spread near 1
        assert abs(p.mean()) < 0.9
        assert 0.45 < p.std() < 1.7


def test_profiles_need_a_zero_voltage_profile_and_a_field():
    rng = np.random.default_rng(1)
    rotor = LinearRotor(5000e6)
    s = _simulate(rng, rotor, 1.5, 15.0)
    no_zero = ProfileSeries(s.label, s.velocity, s.spread, s.profiles[1:])
    with pytest.raises(CompoundError, match=r"expected a profile at V = 0 .* found voltages 5000"):
        fit_profiles([no_zero], rotor, COM, FPV, name="cb")
    with pytest.raises(CompoundError, match="profile data need the field magnitude"):
        fit_profiles([s], rotor, COM, None, name="cb")


def test_profile_moments_of_a_binned_gaussian_and_their_errors():
    # binned Gaussian: centroid = centre, rms width² = σ² + h²/12 (Sheppard's correction;
    # textbook, e.g. Kendall & Stuart vol. 1); the errors against Monte Carlo Poisson draws
    x = np.linspace(-1.5e-3, 1.5e-3, 200)
    h = x[1] - x[0]
    lam = expected_counts(x, h, 20e-6, 110e-6, 2.0, 3e4)
    c, _, w, _ = profile_moments(x, lam, 2.0)
    assert c == pytest.approx(20e-6, abs=1e-9)
    assert w == pytest.approx(np.sqrt(110e-6**2 + h**2 / 12), rel=1e-3)
    rng = np.random.default_rng(5)
    draws = np.array([profile_moments(x, rng.poisson(lam), 2.0) for _ in range(400)])
    for k in (0, 2):  # the spread of the estimates against the mean stated error (±15 %)
        assert draws[:, k].std() == pytest.approx(draws[:, k + 1].mean(), rel=0.15)
