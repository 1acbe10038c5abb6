"""Campaign planning: noise model, Fisher precision, ladders, rehearsals and the plan command."""

from __future__ import annotations

import json
import math
import re
import shutil
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from scipy import constants as sc
from scipy import integrate
from typer.testing import CliRunner

from polarbeam.cli.commands import app
from polarbeam.errors import InputError
from polarbeam.pipeline.analysis import analyze
from polarbeam.planning import (
    SeriesModel,
    acquisition_sequence,
    debye_precision,
    even_ladder,
    ladder_precision,
    load_plan,
    make_plan,
    phase_noise_crb,
    plan_campaign,
    rehearsal_scatter,
    voltage_max,
    write_plan,
)
from polarbeam.planning.precision import fixed_covariance, precision_core
from polarbeam.reduction import fit_scans

runner = CliRunner()
EXAMPLE = Path(__file__).resolve().parents[1] / "examples" / "plan" / "campaign.toml"


@pytest.fixture(scope="module")
def demo_plan():
    """The worked example, restricted to two temperatures and three compounds (fast)."""
    camp, plan, comps = load_plan(EXAMPLE)
    plan = replace(
        plan,
        temperatures_K=(340.0, 640.0),
        temperature_range_K=None,
        n_temperatures=2,
    )
    keep = [c for c in comps if c.name in ("DM-101", "DM-104", "DM-107")]
    return plan_campaign(camp, plan, keep)


def _series(cplan, name, temp):
    comp = next(c for c in cplan.compounds if c.compound == name)
    return next(s for s in comp.series if s.temperature_K == temp)


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
    src = Path(__file__).resolve().parents[1] / "examples" / "timedomain" / "campaign.toml"
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


# ---------------------------------------------------------------------------------------------
# Acceptance: Fisher versus rehearsals, optimal versus even ladder, the worked example
# ---------------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("name", "temp", "systematics"),
    [("DM-104", 340.0, False), ("DM-101", 640.0, False), ("DM-107", 340.0, True)],
)
def test_fisher_sigma_matches_rehearsal_scatter(demo_plan, name, temp, systematics):
    s = _series(demo_plan, name, temp)
    # 300 rehearsals: the sample standard deviation itself scatters by 1/sqrt(600) ≈ 4 %, so the
    # 15 % tolerance is close to 4σ of that statistical uncertainty
    fits, errs = rehearsal_scatter(demo_plan, name, temp, 300, seed=2, systematics=systematics)
    predicted = s.sigma_total_A3 if systematics else s.sigma_stat_A3
    scatter = fits.std(ddof=1)
    print(
        f"{name} @ {temp:g} K ({'with' if systematics else 'without'} systematics): "
        f"Fisher σ = {predicted:.4f} Å³, scatter of 300 rehearsals = {scatter:.4f} Å³ "
        f"(ratio {scatter / predicted:.3f}); mean fit error {errs.mean():.4f} Å³"
    )
    assert scatter == pytest.approx(predicted, rel=0.15)
    # and the rehearsals are unbiased within their scatter
    truth = s.alpha_eff_pred_A3
    assert abs(fits.mean() - truth) < 4 * scatter / math.sqrt(fits.size) + 0.005 * truth


def test_optimal_ladder_beats_even_ladder(demo_plan):
    for c in demo_plan.compounds:
        for s in c.series:
            even_total = math.sqrt(
                s.even.sigma_stat_A3**2 + s.sigma_velocity_A3**2 + s.sigma_scale_A3**2
            )
            print(
                f"{c.compound} @ {s.temperature_K:g} K: σ_stat optimal {s.sigma_stat_A3:.4f} vs "
                f"even {s.even.sigma_stat_A3:.4f} Å³ (total {s.sigma_total_A3:.4f} vs "
                f"{even_total:.4f}); ladder {', '.join(f'{v:.1f}' for v in s.ladder.levels_V)} V"
            )
            assert s.ladder.n_signal == s.even.n_signal
            assert s.ladder.branch_excess == 0.0
            assert s.sigma_stat_A3 < 0.9 * s.even.sigma_stat_A3
            assert max(s.ladder.levels_V) <= s.voltage_max_V * (1 + 1e-12)
    # outside the Fisher model: the scatter of rehearsals with either ladder
    s = _series(demo_plan, "DM-104", 640.0)
    fits_opt, _ = rehearsal_scatter(demo_plan, "DM-104", 640.0, 200, seed=23)
    even_plan = replace(demo_plan.settings, ladder="even")
    camp = demo_plan.campaign
    _, _, comps = load_plan(EXAMPLE)
    ep = plan_campaign(camp, even_plan, [c for c in comps if c.name == "DM-104"])
    fits_even, _ = rehearsal_scatter(ep, "DM-104", 640.0, 200, seed=23)
    print(
        f"DM-104 @ 640 K rehearsal scatter: optimal {fits_opt.std(ddof=1):.4f}, even "
        f"{fits_even.std(ddof=1):.4f} Å³ (Fisher {s.sigma_stat_A3:.4f} vs "
        f"{s.even.sigma_stat_A3:.4f})"
    )
    assert fits_opt.std(ddof=1) < fits_even.std(ddof=1)


def test_scans_for_the_target_are_the_fewest_that_reach_it(demo_plan):
    plan = replace(demo_plan.settings, target_alpha_rel=0.025)
    _, _, comps = load_plan(EXAMPLE)
    p = plan_campaign(demo_plan.campaign, plan, [c for c in comps if c.name == "DM-101"])
    s = p.compounds[0].series[0]
    k = s.scans_per_voltage_target
    timing = dict(
        reference_every=plan.reference_every,
        scan_time_s=plan.scan_time,
        dead_time_s=plan.scan_dead_time,
        diffusion_rad2_s=plan.phase_diffusion,
    )

    def total(k):
        lp = ladder_precision(s.model, s.ladder.levels_V, k, **timing)
        return math.sqrt(
            lp.sigma_stat_A3**2
            + (lp.dalpha_dvelocity * s.velocity_err_m_s) ** 2
            + s.sigma_scale_A3**2
        )

    target = 0.025 * s.alpha_eff_pred_A3
    assert total(k) <= target < total(k - 1)
    n_sig = k * len(s.ladder.levels_V)
    assert s.beam_time_target_s == pytest.approx((n_sig + math.ceil(n_sig / 2) + 1) * 24.0)
    # an unreachable target (below the systematic floor) is reported, not hidden
    plan = replace(demo_plan.settings, target_alpha_rel=0.001)
    p = plan_campaign(demo_plan.campaign, plan, [c for c in comps if c.name == "DM-101"])
    assert math.isinf(p.compounds[0].series[0].beam_time_target_s)
    assert "systematic floor" in p.compounds[0].message


def test_worked_example_plan_then_analyze_rehearsal(tmp_path):
    out = tmp_path / "plan"
    r = runner.invoke(app, ["plan", str(EXAMPLE), "--out", str(out)])
    assert r.exit_code == 0, r.output
    table = pd.read_csv(out / "plan.csv")
    assert list(table.columns[:8]) == [
        "compound",
        "temperature_K",
        "alpha_eff_pred_A3",
        "sigma_alpha_eff_pred_A3",
        "voltage_max_V",
        "n_voltages",
        "scans_per_voltage",
        "beam_time_h",
    ]
    assert {"sigma_alpha_pred_A3", "sigma_dipole_pred_D"} <= set(table.columns)
    assert set(table["compound"]) == {"DM-101", "DM-102", "DM-103", "DM-104", "DM-105", "DM-107"}
    assert table.groupby("compound").size().eq(3).all()
    for name in table["compound"].unique():
        png = out / f"plan_{name}.png"
        assert png.is_file() and png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    doc = json.loads((out / "plan.json").read_text())
    assert doc["compounds"][0]["temperature_sets"][0]["label"] == "best (chosen)"
    md = (out / "plan.md").read_text()
    assert "safety officer" in md
    r = runner.invoke(
        app, ["analyze", str(out / "rehearsal" / "campaign.toml"), "--out", str(tmp_path / "res")]
    )
    assert r.exit_code == 0, r.output
    series = pd.read_csv(tmp_path / "res" / "series.csv")
    m = series.merge(table, on=["compound", "temperature_K"])
    assert len(m) == len(table)
    ratio = m["alpha_eff_err_A3"] / m["sigma_alpha_eff_pred_A3"]
    print("reported / planned σ(α_eff):", np.round(ratio.to_numpy(), 3))
    assert ratio.between(0.7, 1.3).all()
    truth = pd.read_csv(out / "rehearsal" / "truth.csv", comment="#")
    m = m.merge(truth, on=["compound", "temperature_K"])
    pulls = (m["alpha_eff_A3"] - m["alpha_eff_true_A3"]) / m["alpha_eff_err_A3"]
    assert np.all(np.abs(pulls) < 4.5)
    props = pd.read_csv(tmp_path / "res" / "properties.csv").set_index("compound")
    planned = table.drop_duplicates("compound").set_index("compound")
    ratio_a = props["alpha_err_A3"] / planned["sigma_alpha_pred_A3"]
    print("reported / planned σ(α):", np.round(ratio_a.to_numpy(), 3))
    assert ratio_a.between(0.7, 1.3).all()


def test_plan_chooses_the_best_temperature_set(demo_plan):
    camp, plan, comps = load_plan(EXAMPLE)
    p = plan_campaign(camp, plan, [c for c in comps if c.name == "DM-105"])
    (c,) = p.compounds
    best = c.temperature_sets[0]
    others = c.temperature_sets[1:]
    assert best["label"] == "best (chosen)" and len(others) == 2
    assert all(best["criterion"] <= o["criterion"] for o in others)
    assert [s.temperature_K for s in c.series] == best["temperatures_K"]
    lo, hi = plan.temperature_range_K
    assert min(best["temperatures_K"]) >= lo and max(best["temperatures_K"]) <= hi


def test_phase_noise_input(tmp_path):
    text = EXAMPLE.read_text()
    text = re.sub(r"count_rate = .*\n", 'phase_noise = "0.08 rad"\n', text)
    text = re.sub(r"dark_rate = .*\n", "", text)
    (tmp_path / "campaign.toml").write_text(text)
    (tmp_path / "compounds.csv").write_text("compound,mass_u,alpha_A3\npn-1,200,30\n")
    camp, plan, comps = load_plan(tmp_path / "campaign.toml")
    plan = replace(plan, temperatures_K=(400.0, 600.0), temperature_range_K=None)
    p = plan_campaign(camp, plan, comps)
    s = p.compounds[0].series[0]
    assert math.sqrt(s.model.reference_variance) == pytest.approx(0.08, rel=1e-9)


# ---------------------------------------------------------------------------------------------
# Error branches
# ---------------------------------------------------------------------------------------------


def _write(tmp_path, plan_block: str, compounds: str = "compound,mass_u,alpha_A3\nx-1,200,30\n"):
    text = EXAMPLE.read_text().split("[plan]")[0] + plan_block
    (tmp_path / "campaign.toml").write_text(text)
    (tmp_path / "compounds.csv").write_text(compounds)
    return tmp_path / "campaign.toml"


_GOOD = (
    '[plan]\ntemperatures_K = [400, 600]\nvelocity = "210 ± 1 m/s"\nvelocity_spread = "20 m/s"\n'
    'visibility = 0.25\ncount_rate = "240 counts/s"\nscan_time = "20 s"\n'
)


@pytest.mark.parametrize(
    ("block", "pattern"),
    [
        ("", r"campaign\.toml \[plan\]: required table missing"),
        (_GOOD.replace("visibility = 0.25\n", ""), r"\[plan\] visibility: required key missing"),
        (_GOOD.replace('scan_time = "20 s"\n', ""), r"\[plan\] scan_time: required key missing"),
        (_GOOD.replace('velocity = "210 ± 1 m/s"\n', ""), r"\[plan\] velocity: required key"),
        (_GOOD + "visiblity = 0.3\n", r"unknown key\(s\) in \[plan\]: 'visiblity'"),
        (_GOOD + 'phase_noise = "0.1 rad"\n', r"expected exactly one of count_rate"),
        (_GOOD.replace("temperatures_K = [400, 600]\n", ""), r"temperatures_K: required key"),
        (_GOOD + "temperature_range_K = [300, 600]\n", r"expected one of them, found both"),
        (_GOOD + "visibility_floor = 0.4\n", r"visibility_floor: expected a value below"),
        (_GOOD + "ladder = [100, 0]\n", r"\[plan\] ladder: expected"),
        (_GOOD + 'phase_limit = "3 m"\n', r"\[plan\] phase_limit: expected a unit of rad"),
        (
            _GOOD.replace('velocity = "210 ± 1 m/s"', 'velocity = ["210 m/s"]'),
            r"\[plan\] velocity: expected 2 values",
        ),
        (_GOOD + "n_voltages = 1\n", r"\[plan\] n_voltages: expected an integer in \[2, 40\]"),
    ],
)
def test_plan_table_errors(tmp_path, block, pattern):
    path = _write(tmp_path, block)
    with pytest.raises(InputError, match=pattern):
        load_plan(path)


def test_data_and_layout_errors(tmp_path):
    path = _write(tmp_path, _GOOD)
    text = path.read_text().replace(
        'compounds = "compounds.csv"', 'compounds = "compounds.csv"\nshifts = "shifts.csv"'
    )
    path.write_text(text)
    with pytest.raises(InputError, match=r"\[data\] shifts: a planning campaign has no measure"):
        load_plan(path)
    prof = (
        '[instrument]\nlayout = "beam-profile"\ndetector_position = "1.4 m"\n[deflector]\n'
        'model = "uniform"\nentrance = "0.3 m"\nlength = "0.1 m"\nfield_factor = "1e8 m^-3"\n'
        '[data]\ncompounds = "compounds.csv"\n' + _GOOD
    )
    path.write_text(prof)
    with pytest.raises(InputError, match=r"planning needs a fringe layout"):
        load_plan(path)


def test_compound_without_structure_or_alpha_fails_alone(tmp_path):
    comps = "compound,mass_u,smiles,alpha_A3\nok-1,200,,30\nbare-2,180,,\n"
    path = _write(tmp_path, _GOOD, comps)
    p = make_plan(path)
    status = {c.compound: c for c in p.compounds}
    assert status["ok-1"].status != "failed"
    assert status["bare-2"].status == "failed"
    assert re.fullmatch(
        r"compounds\.csv line 3: compound 'bare-2' has no structure \(smiles column or a \[data\] "
        r"structures record\) and no stated alpha_A3; expected one of them",
        status["bare-2"].message,
    )
    r = runner.invoke(app, ["plan", str(path), "--out", str(tmp_path / "out"), "--no-rehearsal"])
    assert r.exit_code == 1
    assert "failed: bare-2: compounds.csv line 3" in r.output
    assert set(pd.read_csv(tmp_path / "out" / "plan.csv")["compound"]) == {"ok-1"}
    path = _write(tmp_path, _GOOD, "compound,mass_u\nbare-3,100\n")
    r = runner.invoke(app, ["plan", str(path), "--out", str(tmp_path / "out2")])
    assert r.exit_code == 2


def test_cli_structural_error_is_one_line(tmp_path):
    path = _write(tmp_path, _GOOD.replace("visibility = 0.25\n", ""))
    r = runner.invoke(app, ["plan", str(path), "--out", str(tmp_path / "o")])
    assert r.exit_code == 2
    lines = [ln for ln in r.output.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("error: campaign.toml [plan] visibility")
    assert "Traceback" not in r.output


def test_even_ladder_is_evenly_spaced():
    assert np.allclose(even_ladder(300.0, 6), [50, 100, 150, 200, 250, 300])


def test_velocity_scaling_and_design_margin(demo_plan):
    camp = demo_plan.campaign
    _, _, comps = load_plan(EXAMPLE)
    one = [c for c in comps if c.name == "DM-101"]
    plan = replace(demo_plan.settings, velocity_temperature_K=340.0, design_margin=1.0)
    p = plan_campaign(camp, plan, one)
    lo, hi = p.compounds[0].series
    # a thermal source: v ∝ sqrt(T), spread and calibration error scale alike
    assert hi.velocity_m_s == pytest.approx(210.0 * math.sqrt(640 / 340), rel=1e-12)
    assert hi.velocity_spread_m_s == pytest.approx(25.0 * math.sqrt(640 / 340), rel=1e-12)
    assert lo.velocity_m_s == pytest.approx(210.0)
    # the margin designs the ladder for α_eff + 1σ of the prediction: the phase limit is reached
    # there, so the predicted α_eff stays below it
    a_hi = lo.alpha_eff_pred_A3 + lo.alpha_eff_pred_err_A3
    ph, _ = lo.model.phase([lo.voltage_max_V], alpha_A3=a_hi)
    assert ph[0] == pytest.approx(plan.phase_limit, abs=1e-6)
    assert max(lo.ladder.phase_rad) < plan.phase_limit
