"""Planning a magnetic campaign (polarbeam.planning.magnetic): the predicted errors of χ_dia and
the moment agree with what the analysis of simulated campaigns of the same plan reports."""

from __future__ import annotations

import csv
import math

import numpy as np
import pytest

from polarbeam.contract.campaign import load_campaign
from polarbeam.extraction.context import build_context
from polarbeam.pipeline.analysis import analyze_campaign
from polarbeam.planning.magnetic import magnetic_plan
from polarbeam.simulation.magnetic import MagneticTruth, magnet_spec, simulate_magnetic_campaign

TEMPS = (300.0, 400.0, 550.0, 700.0)


def test_plan_matches_the_analysis(tmp_path):
    comps = [
        MagneticTruth("dia", 150.0, -80e-6, TEMPS),
        MagneticTruth("rad", 200.0, -100e-6, TEMPS, spin=0.5),
    ]
    reported = {"dia": [], "rad": []}
    plans = {}
    for k in range(4):
        sim = simulate_magnetic_campaign(
            tmp_path / str(k),
            comps,
            spec=magnet_spec("talbot-lau", rel=0.005),
            seed=70 + k,
            max_signal=1.0,
            spread_frac=0.03,
        )
        camp = load_campaign(sim.path / "campaign.toml")
        res = {c.compound: c for c in analyze_campaign(camp).compounds}
        for c in comps:
            reported[c.name].append(res[c.name].extra)
        if k:
            continue
        ctx = build_context(camp)
        rows = list(csv.DictReader((sim.path / "shifts.csv").open(encoding="utf-8")))
        for c in comps:
            cur = [float(r["current_A"]) for r in rows if r["compound"] == c.name][:9]
            inv_v2 = (1 + 3 * 0.03**2) / 180.0**2
            mass = camp.compounds[[x.name for x in camp.compounds].index(c.name)].mass.value
            plans[c.name] = magnetic_plan(
                ctx.coupling / mass,
                cur,
                0.02,
                inv_v2,
                c.chi_dia_cm3_mol,
                c.moment,
                TEMPS,
                scale_rel_err=0.0085,
            )
    for name, plan in plans.items():
        got = np.mean([e["chi_dia_err_cm3_mol"] for e in reported[name]])
        assert plan.sigma_chi_dia_cm3_mol == pytest.approx(got, rel=0.25), name
    rad = np.mean([e["moment_err_muB"] for e in reported["rad"]])
    assert plans["rad"].sigma_moment_muB == pytest.approx(rad, rel=0.25)
    assert math.isnan(plans["dia"].sigma_moment_muB) and plans["dia"].moment_limit_muB > 0
    lim = np.mean([e["moment_upper_muB"] or e["moment_hi_muB"] for e in reported["dia"]])
    assert plans["dia"].moment_limit_muB == pytest.approx(lim, rel=0.6)
