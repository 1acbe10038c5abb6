"""Flight-layout weights against closed-form textbook results."""

import math

import numpy as np
import pytest
from scipy import integrate

from polarbeam.errors import InputError
from polarbeam.instrument.deflectors import UniformDeflector, overlap
from polarbeam.instrument.layouts import BeamProfile, TalbotLau, TimeDomain


def test_talbot_lau_gravity_phase_limit():
    # A uniform acceleration a over the whole symmetric device (L1 = L2 = L) gives
    # Δx = a L²/v², the familiar gravity phase of a three-grating interferometer (common practice;
    # e.g. the classical moiré-deflectometer result).
    L = 0.6
    lay = TalbotLau(0.0, L, 2 * L, 250e-9)
    a, v = 9.80665, 150.0
    dx = a / v**2 * lay.weight_integral(0.0, 2 * L)
    assert math.isclose(dx, a * L**2 / v**2, rel_tol=1e-12)


def test_talbot_lau_asymmetric_matches_numerical_integral():
    lay = TalbotLau(0.1, 0.5, 1.3, 100e-9)
    for a, b in [(0.0, 2.0), (0.2, 0.3), (0.45, 0.9), (1.0, 1.5)]:
        num, _ = integrate.quad(lambda z: float(lay.weight(z)), a, b, points=[0.1, 0.5, 1.3])
        assert math.isclose(lay.weight_integral(a, b), num, rel_tol=1e-9, abs_tol=1e-14)


def test_beam_profile_textbook_deflection():
    # Deflector of length L1 then a drift L2: Δx = F/(m v²)(L1²/2 + L1 L2) (textbook result,
    # e.g. Stern–Gerlach / electric deflection kinematics).
    L1, L2, e = 0.15, 1.0, 0.3
    lay = BeamProfile(e + L1 + L2)
    assert math.isclose(lay.weight_integral(e, e + L1), L1**2 / 2 + L1 * L2, rel_tol=1e-12)
    d = UniformDeflector(2.0e8, e, L1)
    assert math.isclose(overlap(lay, d), 2.0e8 * (L1**2 / 2 + L1 * L2), rel_tol=1e-12)


def test_beam_profile_ignores_field_beyond_detector():
    lay = BeamProfile(1.0)
    assert lay.weight_integral(1.2, 1.5) == 0.0
    assert math.isclose(lay.weight_integral(0.9, 1.5), 0.1 * 0.1 / 2)


def test_time_domain_uniform_force_gives_aT2():
    # Time analogue: a uniform acceleration over [t1, t3] with T1 = T2 = T gives Δx = a T².
    T = 24e-6
    lay = TimeDomain(0.0, T, 2 * T, 80e-9)
    assert math.isclose(lay.weight_integral(0.0, 2 * T), T**2, rel_tol=1e-12)


def test_bad_grating_order_is_named():
    with pytest.raises(InputError, match="grating_positions: expected z1 < z2 < z3"):
        TalbotLau(0.0, 1.0, 0.5, 1e-7)
    with pytest.raises(InputError, match="grating_period"):
        TalbotLau(0.0, 0.5, 1.0, 0.0)


def test_weights_vectorised():
    lay = TalbotLau(0.0, 1.0, 2.0, 1e-7)
    np.testing.assert_allclose(lay.weight([-1, 0.5, 1.0, 1.5, 3]), [0, 0.5, 1.0, 0.5, 0])
