"""Simulate → analyse round trips: the truth is recovered and the error bars are honest.

The simulator draws every systematic (geometry, field factor, velocity calibration, temperature,
mass) from its stated error, so a correct propagation gives pulls (estimate − truth)/σ with
|pull| < 1 in 68.3 % of cases (the Gaussian 1σ coverage, common practice for validating error bars).
"""

from __future__ import annotations

import itertools
import math

import numpy as np
import pytest

from polarbeam.constants import alpha_a3_from_si, debye_from_si, si_from_debye
from polarbeam.pipeline.analysis import analyze
from polarbeam.simulation.campaigns import (
    CompoundTruth,
    InstrumentSpec,
    random_campaign,
    simulate_campaign,
)

N_CAMPAIGNS = 300


@pytest.fixture(scope="module")
def pulls(tmp_path_factory):
    rng = np.random.default_rng(20261201)
    eff, alpha, mu, mu2, cover, signif = [], [], [], [], [], []
    for i in range(N_CAMPAIGNS):
        d = tmp_path_factory.mktemp(f"rt{i}")
        truth = random_campaign(d, rng)
        res = analyze(d / "campaign.toml")
        (c,) = res.compounds
        assert c.status != "failed", c.message
        t = truth.compounds["sample"]
        for s in c.series:
            ref = truth.alpha_eff_A3[(c.compound, s.temperature_K)]
            eff.append((s.alpha_eff_A3 - ref) / s.alpha_eff_err_A3)
        if c.alpha is not None:
            a, da = (alpha_a3_from_si(x) for x in (c.alpha.nominal_value, c.alpha.std_dev))
            alpha.append((a - t.alpha_A3) / da)
        if c.mu2 is not None:
            true_mu2 = si_from_debye(t.dipole_D) ** 2
            mu2.append((c.mu2.nominal_value - true_mu2) / c.mu2.std_dev)
            # μ = sqrt(⟨μ²⟩) with a linearised error is only Gaussian when ⟨μ²⟩ is well measured.
            # Select on the *truth* (expected significance > 5σ), never on the estimate, so the
            # selection cannot bias the pulls; such dipoles are always reported as values.
            # the unified 68.3 % interval [dipole_lo_D, dipole_hi_D] must hold the true μ in
            # 68.3 % of campaigns whatever the true μ (Feldman–Cousins 1998)
            lo, hi = c.row()["dipole_lo_D"], c.row()["dipole_hi_D"]
            cover.append(lo - 1e-12 <= t.dipole_D <= hi + 1e-12)
            signif.append(true_mu2 / c.mu2.std_dev)
            if true_mu2 / c.mu2.std_dev > 5 and c.dipole is not None:
                m, dm = (debye_from_si(x) for x in (c.dipole.nominal_value, c.dipole.std_dev))
                mu.append((m - t.dipole_D) / dm)
    out = {
        k: np.array(v) for k, v in (("alpha_eff", eff), ("alpha", alpha), ("mu", mu), ("mu2", mu2))
    }
    out["cover"], out["signif"] = np.array(cover), np.array(signif)
    return out


@pytest.mark.slow
def test_unified_dipole_intervals_cover_on_simulated_campaigns(pulls):
    """Coverage of the 68.3 % μ interval over all simulated campaigns and in bins of the true
    ⟨μ²⟩/σ (0 to beyond 6σ): within three binomial standard errors of 68.3 % everywhere."""
    cover, z = pulls["cover"], pulls["signif"]
    edges = [0.0, 1.0, 3.0, 6.0, np.inf]
    print(f"\nμ interval coverage: all {cover.mean():.3f} (n={cover.size})")
    for a, b in itertools.pairwise(edges):
        sel = (z >= a) & (z < b)
        if sel.sum() < 20:
            continue
        frac, n = cover[sel].mean(), int(sel.sum())
        tol = 3 * math.sqrt(0.683 * 0.317 / n)
        print(f"  true ⟨μ²⟩/σ in [{a:g}, {b:g}): {frac:.3f} (n={n}, ±{tol:.3f})")
        assert abs(frac - 0.683) < tol
    assert abs(cover.mean() - 0.683) < 3 * math.sqrt(0.683 * 0.317 / cover.size)


@pytest.mark.slow
@pytest.mark.parametrize("name", ["alpha_eff", "alpha", "mu2"])
def test_pull_coverage_and_bias(pulls, name):
    p = pulls[name]
    assert p.size >= 50, p.size
    frac = float(np.mean(np.abs(p) < 1))
    print(
        f"{name}: n={p.size} fraction |pull|<1 = {frac:.3f}, mean {p.mean():+.3f}, sd {p.std():.3f}"
    )
    assert abs(frac - 0.683) < 0.07
    # no bias: the mean pull is compatible with zero (allowing for correlated series)
    assert abs(p.mean()) < 4.0 / math.sqrt(p.size) + 0.1


@pytest.mark.slow
def test_dipole_pulls_for_polar_compounds(tmp_path):
    """Dedicated μ round trip: polar compounds (1.5–4 D) at 3–4 temperatures."""
    rng = np.random.default_rng(77)
    p = []
    for i in range(200):
        truth = random_campaign(
            tmp_path / f"m{i}", rng, dipole_range_D=(1.5, 4.0), n_temperatures=(3, 4)
        )
        (c,) = analyze(truth.path / "campaign.toml").compounds
        t = truth.compounds["sample"]
        true_mu2 = si_from_debye(t.dipole_D) ** 2
        if true_mu2 / c.mu2.std_dev > 5:  # selection on the truth only
            if c.dipole is None:  # a rare > 2σ downward fluctuation reported as a limit:
                # keep it (dropping it would bias the set) with the linear ⟨μ²⟩ pull
                p.append((c.mu2.nominal_value - true_mu2) / c.mu2.std_dev)
                continue
            m, dm = (debye_from_si(x) for x in (c.dipole.nominal_value, c.dipole.std_dev))
            p.append((m - t.dipole_D) / dm)
    p = np.array(p)
    frac = float(np.mean(np.abs(p) < 1))
    print(f"mu (polar set): n={p.size} fraction |pull|<1 = {frac:.3f}, mean {p.mean():+.3f}")
    assert p.size > 60
    assert abs(frac - 0.683) < 0.07
    assert abs(p.mean()) < 4.0 / math.sqrt(p.size)


def test_velocity_spread_is_not_a_bias(tmp_path):
    """A 15 % spread biases a naive 1/⟨v⟩² analysis by ~7 %; the averaged model does not."""
    comp = CompoundTruth("wide", 300.0, 40.0, 0.0, (300.0, 500.0, 700.0))
    spec = InstrumentSpec.talbot_lau(rel=1e-6)
    truth = simulate_campaign(
        tmp_path,
        [comp],
        spec=spec,
        seed=3,
        spread_frac=0.15,
        velocity_err_frac=1e-6,
        noise=0.002,
        temperature_err_K=0.0,
    )
    res = analyze(truth.path / "campaign.toml")
    (c,) = res.compounds
    for s in c.series:
        ref = truth.alpha_eff_A3[("wide", s.temperature_K)]
        assert abs(s.alpha_eff_A3 / ref - 1) < 0.005
        naive = s.alpha_eff_A3 * (1 + 3 * 0.15**2)  # what 1/⟨v⟩² would have reported
        assert naive / ref - 1 > 0.05
