"""The velocity model in the fits: named shapes, the spread error, the background acceleration and
the measured-visibility check.

Independent checks: the implicit derivatives of α̂ against refits with the input moved by ±h
(central differences of the whole fit, as the uncertainties package checks its derivatives); the
zero-field phase of a background acceleration against the gravity-phase limit of the Talbot–Lau
weights (Δx = a·L²/v² for L1 = L2 = L, textbook matter-wave interferometry).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.contract.schema import SeriesData
from polarbeam.contract.velocity import velocity_warnings
from polarbeam.extraction.series import fit_series, observable_model, series_distributions
from polarbeam.extraction.visibility_check import visibility_departures
from polarbeam.instrument.layouts import TalbotLau
from polarbeam.quantities import Measured

COM = 1.3e38  # coupling / mass (SI), chosen for phases of a few rad at ±300 V
ALPHA = 30.0 * 1.11265005605e-40


def _series(values, spread=40.0, spread_err=0.0, shape="gaussian", vis=None, vis_err=None):
    v = np.linspace(-300.0, 300.0, 9)
    return SeriesData(
        compound="x",
        temperature=Measured(300.0, 0.0),
        velocity=Measured(200.0, 1.0),
        velocities=np.full(v.size, 200.0),
        spreads=np.full(v.size, spread),
        voltages=v,
        values=np.asarray(values, dtype=float),
        errors=np.full(v.size, 0.01),
        lines=tuple(range(v.size)),
        shape=shape,
        spread_error=spread_err,
        visibility=vis,
        visibility_err=vis_err,
    )


def _model(spread=40.0, k0=0.0, shape="gaussian"):
    v = np.linspace(-300.0, 300.0, 9)
    grp = series_distributions(np.full(9, 200.0), np.full(9, spread), shape=shape)
    return observable_model(ALPHA, v, COM, None, None, "talbot-lau", groups=grp, kappa_zero=k0)


def test_gravity_phase_limit_of_the_acceleration_constant():
    # L1 = L2 = L: W_tot = L²; the zero-field phase of one class is 2π a L²/(d v²)
    lay = TalbotLau(0.0, 0.5, 1.0, 250e-9)
    k0 = lay.scale * lay.weight_integral(lay.z1, lay.z3) * 0.02
    assert k0 / 200.0**2 == pytest.approx(2 * math.pi * 0.02 * 0.5**2 / (250e-9 * 200.0**2))


@pytest.mark.parametrize("which", ["spread", "kappa_zero"])
def test_implicit_derivatives_match_refits(which):
    k0 = 2.0e5
    y, _ = _model(40.0, k0, "supersonic")
    s = _series(y, 40.0, spread_err=2.0, shape="supersonic")
    fit = fit_series(s, COM * 3.0e-25, 3.0e-25, "talbot-lau", kappa_zero=k0)
    if which == "spread":
        h = 0.5
        up = fit_series(
            _series(y, 40.0 + h, 2.0, "supersonic"), COM * 3e-25, 3e-25, "talbot-lau", kappa_zero=k0
        )
        dn = fit_series(
            _series(y, 40.0 - h, 2.0, "supersonic"), COM * 3e-25, 3e-25, "talbot-lau", kappa_zero=k0
        )
        expected, got = (up.alpha_si - dn.alpha_si) / (2 * h), fit.dalpha_dspread
    else:
        h = k0 * 1e-3
        up = fit_series(s, COM * 3e-25, 3e-25, "talbot-lau", kappa_zero=k0 + h)
        dn = fit_series(s, COM * 3e-25, 3e-25, "talbot-lau", kappa_zero=k0 - h)
        expected, got = (up.alpha_si - dn.alpha_si) / (2 * h), fit.dalpha_dkappa_zero
    assert fit.alpha_si == pytest.approx(ALPHA, rel=1e-6)
    assert got == pytest.approx(expected, rel=2e-3)
    assert got != 0.0


def test_acceleration_changes_the_phase_at_every_voltage_not_only_an_offset():
    y0, _ = _model(60.0, 0.0)
    y1, _ = _model(60.0, 3.0e5)
    d = y1 - y0
    assert d[4] == pytest.approx(0.0, abs=1e-12)  # zero field: phase relative to zero field
    assert np.ptp(d) > 0.01


def test_visibility_check_names_the_departing_voltages():
    y, mod = _model(40.0)
    ok = _series(y, vis=0.3 * mod, vis_err=np.full(9, 0.005))
    assert visibility_departures(ok, mod) == []
    bad_vis = 0.3 * mod
    bad_vis[0] -= 0.05  # 10σ low at -300 V
    bad = _series(y, vis=bad_vis, vis_err=np.full(9, 0.005))
    (msg,) = visibility_departures(bad, mod)
    assert msg.startswith("x @ 300 K: the measured visibility departs from the velocity model's")
    assert "at 1 of 9 voltages (-300 V: measured" in msg
    assert "the velocity distribution (shape, spread or contrast) may not describe" in msg


def test_gaussian_velocity_model_unchanged_without_the_new_inputs():
    # the default groups are the Gaussian of the columns, one per distinct (mean, spread)
    ((sel, dist),) = series_distributions(np.full(3, 200.0), np.full(3, 20.0))
    assert sel.all() and dist == GaussianVelocity(200.0, 20.0)


def test_broad_gaussian_warning_in_every_velocity_layout():
    broad = _series(np.zeros(9), spread=60.0)  # σ/v̄ = 0.30
    narrow = _series(np.zeros(9), spread=40.0)  # 0.20
    for layout in ("talbot-lau", "beam-profile"):
        (w,) = velocity_warnings(broad, layout)
        assert w.startswith("x @ 300 K: velocity spread σ/v̄ = 0.30 > 0.25")
        assert velocity_warnings(narrow, layout) == []
    assert velocity_warnings(broad, "time-domain") == []  # no velocity in that phase
    assert velocity_warnings(_series(np.zeros(9), 60.0, shape="supersonic"), "beam-profile") == []
