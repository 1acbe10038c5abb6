"""The Rician visibility fit: likelihood pieces, a single-campaign recovery, the three-material-
grating case and a campaign that holds deflection data and visibilities together."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, optimize, stats

from polarbeam.beam.talbot import MaterialGrating, TalbotLauInterferometer
from polarbeam.constants import AMU
from polarbeam.contract.campaign import load_campaign
from polarbeam.extraction.visibility import (
    LIKELIHOOD_THRESHOLD,
    analyze_visibilities,
    rician_deviance,
    rician_nll,
    saturated_amplitude,
)
from polarbeam.pipeline.analysis import analyze_campaign
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign
from polarbeam.simulation.visibility import (
    VisibilityCompoundTruth,
    VisibilitySetup,
    simulate_visibility_campaign,
)


def test_rician_nll_is_the_rice_distribution():
    # scipy.stats.rice: p(V) with b = ν/σ, scale σ (scipy documentation); our nll drops ln(V/σ²)
    v, nu, s = np.array([0.02, 0.1, 0.3]), 0.12, 0.05
    full = rician_nll(v, nu, s) - np.log(v / s**2)
    assert np.allclose(full, -stats.rice.logpdf(v, nu / s, scale=s), rtol=1e-12)
    # normalised over V ≥ 0
    total = integrate.quad(lambda x: math.exp(-rician_nll(x, nu, s) + math.log(x / s**2)), 0, 1)
    assert total[0] == pytest.approx(1.0, abs=1e-9)


def test_saturated_amplitude_maximises_each_point():
    v = np.array([0.0, 0.03, 0.08, 0.2, 0.5])
    s = 0.05
    sat = saturated_amplitude(v, s)
    for vi, ni in zip(v, sat, strict=True):
        best = optimize.minimize_scalar(
            lambda n, vi=vi: rician_nll(vi, n, s),
            bounds=(0, 1),
            method="bounded",
            options={"xatol": 1e-12},
        )
        assert rician_nll(vi, ni, s) <= best.fun + 1e-9
    assert sat[0] == 0 and sat[1] == 0  # V² ≤ 2σ²: the likelihood peaks at ν = 0
    # far from zero the deviance is the Gaussian χ² (Σ((V − ν)/σ)²)
    vv, nn = np.array([0.6, 0.7]), np.array([0.62, 0.67])
    gauss = float(np.sum(((vv - nn) / 0.01) ** 2))
    assert rician_deviance(vv, nn, 0.01) == pytest.approx(gauss, rel=1e-3)


def test_rician_estimate_is_unbiased_where_the_mean_visibility_is_not():
    # 20000 Rician draws at ν = 0.8 σ: the sample mean is biased up by > 50 %, the Rician
    # maximum-likelihood ν is within 3 % (statistical error ≈ 1 %)
    rng = np.random.default_rng(4)
    nu, s = 0.04, 0.05
    v = np.abs(nu + s * (rng.standard_normal(20000) + 1j * rng.standard_normal(20000)))
    fit = optimize.minimize_scalar(
        lambda n: float(np.sum(rician_nll(v, n, s))), bounds=(0, 0.2), method="bounded"
    )
    assert v.mean() > 1.5 * nu
    assert fit.x == pytest.approx(nu, rel=0.03)


SETUP = VisibilitySetup(powers=tuple(np.linspace(0.5, 10.0, 12)))


def test_one_campaign_recovers_the_truth_and_prefers_the_quantum_model(tmp_path):
    comps = [
        VisibilityCompoundTruth(
            "a", 1800.0, 120.0, 5.0, ((500.0, 160.0, 19.0, 1.6), (600.0, 220.0, 26.0, 2.2))
        ),
        VisibilityCompoundTruth(
            "b", 2500.0, 90.0, 2.0, ((550.0, 150.0, 18.0, 1.5), (650.0, 200.0, 24.0, 2.0))
        ),
    ]
    path, truth = simulate_visibility_campaign(tmp_path / "c", comps, SETUP, seed=8)
    result = analyze_visibilities(load_campaign(path))
    for c in result.compounds:
        t = truth["compounds"][c.compound]
        assert c.status == "ok", c.message
        assert abs(c.alpha_opt.nominal_value - t["alpha_opt_A3"]) < 3 * c.alpha_opt.std_dev
        assert abs(c.sigma_abs.nominal_value - t["sigma_abs_m2"]) < 3 * c.sigma_abs.std_dev
        assert c.chi2_classical - c.chi2_quantum > LIKELIHOOD_THRESHOLD
        assert c.preferred_model == "quantum"
        assert c.chi2_quantum < c.ndof + 4 * math.sqrt(2 * c.ndof)
        budget = c.budget["alpha_opt"]
        assert {
            "gratings: power_scale",
            "gratings: laser_waist_vertical",
            "gratings: open_fraction",
            "fit statistics",
        } <= set(budget)
        assert sum(budget.values()) == pytest.approx(1.0)
    # the shared inputs are one variable across compounds: α_a and α_b are correlated
    a, b = (c.alpha_opt for c in result.compounds)
    cov = sum(
        da * b.derivatives.get(var, 0.0) * var.std_dev**2
        for var, da in a.derivatives.items()
        if var.tag and var.tag.startswith("gratings")
    )
    assert cov > 0
    table = result.table
    assert list(table.columns) == [
        "compound",
        "wavelength_nm",
        "alpha_opt_A3",
        "alpha_opt_err_A3",
        "sigma_abs_m2",
        "sigma_abs_err_m2",
        "chi2_quantum",
        "chi2_classical",
        "preferred_model",
    ]


def test_three_material_gratings_compare_the_two_models(tmp_path):
    # simulated quantum visibilities of three slit gratings: no free parameter, the deviance of
    # each model decides (the classical moiré has a constant visibility)
    rng = np.random.default_rng(2)
    tl = TalbotLauInterferometer(0.2, 1e-6, *(MaterialGrating(0.4) for _ in range(3)))
    rows = [
        "compound,temperature_K,velocity_m_s,velocity_err_m_s,velocity_spread_m_s,"
        "laser_power_W,visibility,visibility_err"
    ]
    for v in (80.0, 100.0, 120.0, 150.0, 200.0, 260.0):
        nu = tl.visibility(300 * AMU, v, [0.0])[0]
        vis = abs(nu + 0.01 * complex(*rng.standard_normal(2)))
        rows.append(f"m,400,{v},0,0,0,{vis:.6f},0.01")
    (tmp_path / "visibilities.csv").write_text("\n".join(rows) + "\n")
    (tmp_path / "compounds.csv").write_text("compound,mass_u\nm,300\n")
    (tmp_path / "campaign.toml").write_text(
        '[instrument]\nlayout = "talbot-lau"\ngrating_period = "1 um"\n'
        'grating_positions = ["0 m", "0.2 m", "0.4 m"]\n'
        '[gratings]\nfirst = "material"\nsecond = "material"\nthird = "material"\n'
        'open_fraction = "0.4"\n'
        '[data]\ncompounds = "compounds.csv"\nvisibilities = "visibilities.csv"\n'
    )
    c = analyze_visibilities(load_campaign(tmp_path / "campaign.toml")).compounds[0]
    assert c.status == "ok", c.message
    assert c.alpha_opt is None and c.ndof == 6
    assert c.preferred_model == "quantum"
    assert c.chi2_quantum < 20 < c.chi2_classical


def test_campaign_with_deflection_data_and_visibilities(tmp_path):
    deflection = [
        CompoundTruth(f"cmp-{i + 1}", 150.0 + 40 * i, 15.0 + 5 * i, 1.0 * i, (300.0, 450.0, 600.0))
        for i in range(2)
    ]
    truth = simulate_campaign(
        tmp_path / "camp",
        deflection,
        spec=InstrumentSpec.talbot_lau(),
        seed=np.random.default_rng(3),
    )
    camp = truth.path / "campaign.toml"
    comps = [VisibilityCompoundTruth("cmp-1", 1500.0, 110.0, 4.0, ((500.0, 170.0, 20.0, 1.5),))]
    setup = VisibilitySetup(spacing=0.38, powers=SETUP.powers)
    vpath, _ = simulate_visibility_campaign(tmp_path / "v", comps, setup, seed=1)
    (camp.parent / "visibilities.csv").write_text((vpath.parent / "visibilities.csv").read_text())
    text = camp.read_text()
    positions = text.split("grating_positions = ")[1].split("\n")[0]
    grating = [x.strip().strip('"') for x in positions.strip("[]").split(",")]
    assert grating  # the deflection campaign's own geometry sets the interferometer
    period = text.split("grating_period = ")[1].split("\n")[0].strip('"')
    text = text.replace("[data]", '[data]\nvisibilities = "visibilities.csv"')
    text += (
        '\n[gratings]\nfirst = "material"\nsecond = "light"\nthird = "material"\n'
        f'open_fraction = "0.42 ± 0.02"\nlaser_wavelength = "{_twice(period)}"\n'
        'laser_waist_vertical = "900 ± 30 um"\npower_scale = "1 ± 0.03"\n'
    )
    camp.write_text(text)
    c = load_campaign(camp)
    result = analyze_campaign(c)
    assert len(result.compounds) == 2 and all(x.status != "failed" for x in result.compounds)
    assert [x.compound for x in result.optical.compounds] == ["cmp-1"]
    assert result.optical.compounds[0].status == "ok"
    assert "optical" in result.summary()


def _twice(period: str) -> str:
    value, unit = period.split()[0], period.split()[-1]
    return f"{2 * float(value):g} {unit}"
