"""The magnetic structure cross-check: spin-only verdicts and Pascal's χ_dia on a campaign."""

from __future__ import annotations

import pytest

from polarbeam.comparison.magnetic import spin_text, spin_verdict
from polarbeam.contract.campaign import load_campaign
from polarbeam.pipeline.analysis import analyze_campaign
from polarbeam.simulation.magnetic import MagneticTruth, simulate_magnetic_campaign


def test_spin_text():
    assert [spin_text(s) for s in (0.5, 1.0, 1.5, 2.0)] == ["1/2", "1", "3/2", "2"]


@pytest.mark.parametrize(
    ("moment", "err", "verdict"),
    [
        (1.74, 0.03, "consistent with S = 1/2"),  # spin-only 1.73 μ_B (g = 2.0023)
        (2.83, 0.05, "consistent with S = 1"),  # 2.83 μ_B
        (3.88, 0.05, "consistent with S = 3/2"),  # 3.87 μ_B
        (2.30, 0.03, "not a spin-only moment"),
    ],
)
def test_spin_verdicts(moment, err, verdict):
    assert spin_verdict(moment, err, None)[0].startswith(verdict)


def test_upper_limit_verdict():
    text, spins = spin_verdict(None, None, 0.1)
    assert text.startswith("consistent with S = 0") and spins == (0.0,)


def test_campaign_cross_check(tmp_path):
    # benzene-like diamagnet (Pascal −55.0e-6 cm³/mol) and a methyl-like S = 1/2 radical
    comps = [
        MagneticTruth("ref-dia", 78.0, -55e-6, (300.0, 450.0, 600.0), smiles="c1ccccc1"),
        MagneticTruth("rad-a", 15.0, -12e-6, (300.0, 450.0, 600.0), spin=0.5, smiles="[CH3]"),
        MagneticTruth("rad-b", 15.0, -12e-6, (300.0, 450.0, 600.0), spin=1.0, smiles="[CH3]"),
    ]
    sim = simulate_magnetic_campaign(tmp_path / "c", comps, seed=3)
    res = {
        c.compound: c for c in analyze_campaign(load_campaign(sim.path / "campaign.toml")).compounds
    }
    dia = res["ref-dia"]
    assert abs(dia.extra["chi_dia_pascal_z"]) < 3
    assert dia.extra["chi_dia_pascal_cm3_mol"] == pytest.approx(-55.02e-6, rel=1e-3)
    assert "structure S = 0 agrees" in dia.message
    assert res["rad-a"].extra["spin_verdict"] == "consistent with S = 1/2"
    assert "structure S = 1/2 agrees" in res["rad-a"].message
    # a triplet measured where the structure says doublet: flagged
    assert res["rad-b"].status == "warning"
    assert "is not what the moment says" in res["rad-b"].message


def test_small_moment_near_zero_is_consistent_with_s0():
    # a moment reported by the 95 % unified interval but ⟨m²⟩ only 2σ above zero
    assert spin_verdict(0.09, 0.024, None, mu2_z=2.0)[1] == (0.0,)
    assert spin_verdict(0.09, 0.024, None, mu2_z=5.0)[1] == ()
