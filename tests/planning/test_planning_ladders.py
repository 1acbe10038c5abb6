"""Campaign planning: Fisher precision versus rehearsals, ladders, scans for a target and the
temperature choice."""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest

from polarbeam.planning import (
    even_ladder,
    ladder_precision,
    load_plan,
    plan_campaign,
    rehearsal_scatter,
)

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "plan" / "campaign.toml"


def _series(cplan, name, temp):
    comp = next(c for c in cplan.compounds if c.compound == name)
    return next(s for s in comp.series if s.temperature_K == temp)


# ---------------------------------------------------------------------------------------------
# Acceptance: Fisher versus rehearsals, optimal versus even ladder, targets, temperatures
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
