"""Campaign planning: noise model, Fisher algebra, voltage limit and Debye-line precision."""

from __future__ import annotations

import math
import shutil
from pathlib import Path

import numpy as np
import pytest
from scipy import constants as sc
from scipy import integrate

from polarbeam.pipeline.analysis import analyze
from polarbeam.planning import (
    SeriesModel,
    acquisition_sequence,
    debye_precision,
    make_plan,
    phase_noise_crb,
    voltage_max,
    write_plan,
)
from polarbeam.planning.precision import fixed_covariance, precision_core
from polarbeam.reduction import fit_scans

# ---------------------------------------------------------------------------------------------
# Noise model and Fisher algebra against independent calculations
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize("vis", [0.05, 0.3, 0.8, 0.97])
def test_phase_noise_is_the_poisson_cramer_rao_bound_of_the_bins(vis):
    # Independent calculation: Fisher information of Poisson bins (I_jk = Σ ∂μ/∂p_j ∂μ/∂p_k / μ,
    # the textbook Poisson Fisher matrix, common practice) for μ_b = c(1 + V cos(θ_b − φ)) with
    # unknown c, V and φ, 40 bins over one period; σ_φ² is the (φ, φ) element of its inverse.
    n_tot, bins = 6000.0, 40
    theta = 2 * np.pi * np.arange(bins) / bins
    c, phi = n_tot / bins, 0.7
    mu = c * (1 + vis * np.cos(theta - phi))
    grad = np.stack(
        [mu / c, c * np.cos(theta - phi), c * vis * np.sin(theta - phi)]
    )  # ∂μ/∂(c, V, φ)
    fisher = (grad / mu) @ grad.T
    sigma_fisher = math.sqrt(np.linalg.inv(fisher)[2, 2])
    # (the closed form is the continuous-phase integral; 40 bins differ from it by < 1e-4)
    assert phase_noise_crb(n_tot, vis) == pytest.approx(sigma_fisher, rel=1e-4)
    # small-visibility limit σ_φ → sqrt(2/N)/V (common practice for fringe phase noise)
    if vis < 0.1:
        assert phase_noise_crb(n_tot, vis) == pytest.approx(math.sqrt(2 / n_tot) / vis, rel=2e-3)


def test_phase_noise_matches_the_reduction_error():
    # The reduction's per-scan fit reports the inverse Fisher error at its model: on noiseless
    # expected counts it must give the same phase error the planner assumes.
    period, bins, vis, per_bin = 266e-9, 40, 0.25, 120.0
    x = np.arange(bins) * period / bins
    mu = per_bin * (1 + vis * np.cos(2 * np.pi * x / period - 0.4))
    fits = fit_scans(np.zeros(bins, dtype=int), x, mu, period)
    assert fits.phase_err[0] == pytest.approx(phase_noise_crb(mu.sum(), vis), rel=1e-6)


def test_fisher_of_independent_points_is_the_weighted_line_fit():
    # With independent points the planner's Fisher variance of α_eff is the slope variance of a
    # weighted straight line (numpy.polyfit with cov="unscaled").
    rng = np.random.default_rng(3)
    x = np.sort(rng.uniform(0.01, 0.2, 12))
    sig = rng.uniform(0.05, 0.2, 12)
    var_a, _, _ = precision_core(x, sig**2, None, np.zeros((12, 12)), True)
    _, cov = np.polyfit(x, rng.normal(size=12), 1, w=1 / sig, cov="unscaled")
    assert var_a == pytest.approx(cov[0, 0], rel=1e-10)
    var_1, _, _ = precision_core(x, sig**2, None, np.zeros((12, 12)), False)
    assert var_1 == pytest.approx(1 / np.sum(x**2 / sig**2), rel=1e-10)  # through the origin


def test_drift_corrected_covariance_against_monte_carlo():
    # Monte Carlo of the drift correction: references and signal scans with independent phase
    # noise plus a random walk; the corrected phase is the signal minus the linearly
    # interpolated references.  Its sample covariance must match the planner's analytic one.
    rng = np.random.default_rng(11)
    seq = acquisition_sequence([1.0, 2.0, 3.0], 2, 2, 20.0, 4.0)
    var_s, var_r, diff = 0.01, 0.004, 2e-4
    t = seq.times
    n_draw = 40000
    steps = rng.standard_normal((n_draw, t.size)) * np.sqrt(diff * np.r_[0.0, np.diff(t)])
    walk = np.cumsum(steps, axis=1)
    noise = rng.standard_normal((n_draw, t.size)) * np.where(
        seq.is_reference, math.sqrt(var_r), math.sqrt(var_s)
    )
    phase = walk + noise
    tr, ts = t[seq.is_reference], t[~seq.is_reference]
    ref = phase[:, seq.is_reference]
    interp = np.stack([np.interp(ts, tr, row) for row in ref])
    corrected = phase[:, ~seq.is_reference] - interp
    mc = np.cov(corrected, rowvar=False)
    analytic = fixed_covariance(seq, var_r, diff) + var_s * np.eye(ts.size)
    assert np.allclose(mc, analytic, atol=6 * analytic.max() / math.sqrt(n_draw))


def test_acquisition_order():
    seq = acquisition_sequence([30.0, 10.0, 20.0], 3, 2, 20.0, 4.0)
    sig = seq.voltages[~seq.is_reference]
    assert seq.is_reference[0] and seq.is_reference[-1]
    assert seq.is_reference.sum() == math.ceil(sig.size / 2) + 1
    assert sorted(np.abs(sig)) == sorted([10.0, 20.0, 30.0] * 3)
    assert list(sig[:3]) == [10.0, 20.0, 30.0]  # first pass up, positive
    assert list(sig[3:6]) == [-30.0, -20.0, -10.0]  # second pass down, reversed polarity
    assert np.allclose(np.diff(seq.times), 24.0)


def _quad_phasor(kappa, v0, sv):
    # ⟨exp(iκ/v²)⟩ over a Gaussian velocity distribution by adaptive quadrature (scipy), an
    # independent evaluation of the velocity average.
    def pdf(v):
        return np.exp(-0.5 * ((v - v0) / sv) ** 2) / (sv * math.sqrt(2 * math.pi))

    lo, hi = max(v0 - 8 * sv, 1e-3 * v0), v0 + 8 * sv
    re_ = integrate.quad(lambda v: pdf(v) * math.cos(kappa / v**2), lo, hi, limit=400)[0]
    im_ = integrate.quad(lambda v: pdf(v) * math.sin(kappa / v**2), lo, hi, limit=400)[0]
    return complex(re_, im_)


def test_voltage_max_phase_and_visibility_limits_against_quadrature():
    model = SeriesModel(
        40.0, 1e14 / (150 * sc.atomic_mass), 200.0, 30.0, "talbot-lau", 5e3, 0.3, 0.3
    )
    com = model.coupling_over_mass * 40.0 * 4 * math.pi * sc.epsilon_0 * 1e-30
    # phase-limited: the phase at V_max is the limit
    v, why = voltage_max(model, 2.0, 0.01)
    z = _quad_phasor(com * v**2, 200.0, 30.0)
    assert why == "phase limit"
    assert np.angle(z) == pytest.approx(2.0, abs=2e-3)
    # visibility-limited: V₀·|⟨e^{iφ}⟩| at V_max is the floor
    v, why = voltage_max(model, 50.0, 0.15)
    z = _quad_phasor(com * v**2, 200.0, 30.0)
    assert why == "visibility floor"
    assert 0.3 * abs(z) == pytest.approx(0.15, abs=1e-3)
    # a supply limit below both wins
    assert voltage_max(model, 2.0, 0.01, voltage_limit=10.0) == (10.0, "voltage limit")


def test_debye_precision_against_polyfit_and_monte_carlo():
    t = np.array([340.0, 480.0, 640.0])
    a_eff = np.array([60.0, 45.0, 38.0])
    s = np.array([0.8, 0.5, 0.4]) ** 2
    # no shared scale, no temperature error: the weighted straight line in 1/T (numpy.polyfit)
    dp = debye_precision(a_eff, s, s, 0.0, t, 0.0, 0.0)
    _, cov = np.polyfit(1 / t, a_eff, 1, w=1 / np.sqrt(s), cov="unscaled")
    assert dp.sigma_alpha_A3 == pytest.approx(math.sqrt(cov[1, 1]), rel=1e-9)
    # ⟨μ²⟩ = 3kβ: 1 D² of ⟨μ²⟩ is a slope of (1 D)²/(3k·4πε0) in Å³·K (CODATA via scipy)
    debye = 1e-21 / sc.c
    slope_per_d2 = debye**2 / (3 * sc.k * 4 * math.pi * sc.epsilon_0 * 1e-30)
    assert dp.sigma_mu2_D2 == pytest.approx(math.sqrt(cov[0, 0]) / slope_per_d2, rel=1e-9)
    # shared 2 % scale and 2 K temperature errors: Monte Carlo of the same fixed-weight estimator
    rng = np.random.default_rng(5)
    mu2 = (a_eff[0] - a_eff[-1]) / (1 / t[0] - 1 / t[-1]) / slope_per_d2
    dp = debye_precision(a_eff, s, s, 0.02**2, t, 2.0, mu2)
    beta = mu2 * slope_per_d2
    n = 200000
    scale = 1 + 0.02 * rng.standard_normal((n, 1))
    t_true = t + 2.0 * rng.standard_normal((n, 3))
    alpha0 = a_eff[0] - beta / t[0]
    y = (alpha0 + beta / t_true) * scale + rng.standard_normal((n, 3)) * np.sqrt(s)
    w = 1 / (s + (beta * 2.0 / t**2) ** 2)
    x = 1 / t
    A = np.column_stack([np.ones(3), x])
    est = np.linalg.solve(A.T @ (w[:, None] * A), (A * w[:, None]).T)
    intercepts = y @ est[0]
    assert intercepts.std() == pytest.approx(dp.sigma_alpha_A3, rel=0.02)
    assert (y @ est[1]).std() / slope_per_d2 == pytest.approx(dp.sigma_mu2_D2, rel=0.02)


def test_time_domain_plan_closed_form(tmp_path):
    # Time domain: φ = α_eff·C·V²/m exactly (no velocity), so V_max = sqrt(limit·m/(α_eff C)).
    src = Path(__file__).resolve().parents[2] / "examples" / "timedomain" / "campaign.toml"
    text = src.read_text()
    head = text.split("[data]")[0]
    (tmp_path / "campaign.toml").write_text(
        head
        + '[data]\ncompounds = "compounds.csv"\n\n[plan]\ntemperatures_K = [400, 600]\n'
        + 'visibility = 0.3\ncounts_per_bin = 100\nscan_time = "10 s"\nphase_limit = "2.5 rad"\n'
        + 'temperature_err = "1 K"\n'
    )
    (tmp_path / "compounds.csv").write_text("compound,mass_u,alpha_A3,dipole_D\ntd-1,250,30,1.0\n")
    camp_text = (tmp_path / "campaign.toml").read_text()
    if "waveform" in camp_text:  # the example's waveform file travels with it
        shutil.copy(src.parent / "waveform.csv", tmp_path / "waveform.csv")
    p = make_plan(tmp_path / "campaign.toml")
    (c,) = p.compounds
    assert c.status != "failed", c.message
    for s in c.series:
        # α_eff = α + μ²/(3kT) with CODATA constants (scipy), in Å³
        mu = 1e-21 / sc.c
        a_eff = 30.0 + mu**2 / (3 * sc.k * s.temperature_K) / (4 * math.pi * sc.epsilon_0 * 1e-30)
        assert s.alpha_eff_pred_A3 == pytest.approx(a_eff, rel=1e-9)
        a_si = a_eff * 4 * math.pi * sc.epsilon_0 * 1e-30
        vmax = math.sqrt(2.5 * 250 * sc.atomic_mass / (a_si * p.coupling))
        assert s.voltage_max_V == pytest.approx(vmax, rel=1e-6)
        assert s.sigma_velocity_A3 == 0.0
    # the time-domain rehearsal goes through the analysis too
    write_plan(p, tmp_path / "plan")
    res = analyze(tmp_path / "plan" / "rehearsal" / "campaign.toml")
    assert [c.status for c in res.compounds] != ["failed"], res.compounds[0].message
    assert len(res.compounds[0].series) == 2


def test_error_keys_use_the_err_suffix():
    from polarbeam.planning.results import err_key

    assert err_key("sigma_alpha_A3") == "alpha_err_A3"
    assert err_key("sigma_mu2_stat_D2") == "mu2_stat_err_D2"
    assert err_key("sigma_total_A3") == "alpha_eff_expected_err_A3"  # an error of α_eff
    assert err_key("alpha_pred_A3") == "alpha_pred_A3" and err_key("corr") == "corr"
