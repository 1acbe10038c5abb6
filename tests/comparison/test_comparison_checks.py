"""z-scores and verdicts of the structure cross-check (values computed by hand)."""

from __future__ import annotations

import math

import pytest

from polarbeam.comparison.structure_check import verdict, z_score


def test_z_score_by_hand():
    # (10 − 4) / √(3² + 4²) = 6 / 5
    assert z_score(10.0, 3.0, 4.0, 4.0) == pytest.approx(1.2, rel=1e-15)
    # (1 − 13) / √(5² + 12²) = −12 / 13
    assert z_score(1.0, 5.0, 13.0, 12.0) == pytest.approx(-12 / 13, rel=1e-15)
    assert math.isnan(z_score(1.0, 0.0, 1.0, 0.0))


@pytest.mark.parametrize(
    "alpha_z,eff_z,dipole,start",
    [
        (None, [0.5, -0.5], False, "consistent"),
        (None, [3.0, 2.5], False, "dipole contribution likely"),
        (None, [3.0, 2.5], True, "above prediction"),
        (None, [-2.5, -3.0], False, "measured below prediction"),
        (-2.1, [0.0], False, "measured below prediction"),
        (2.5, [0.0], False, "α above the additive estimate"),
        # the series of one compound are averaged: (3.0 + 0.5)/2 = 1.75 < 2
        (None, [3.0, 0.5], False, "consistent"),
        # a NaN z-score is ignored: mean of [2.5] = 2.5 > 2
        (None, [2.5, float("nan")], False, "dipole contribution likely"),
        (None, [], False, "consistent"),
    ],
)
def test_verdict_by_hand(alpha_z, eff_z, dipole, start):
    assert verdict(alpha_z, eff_z, dipole).startswith(start)


def test_structure_columns_name_the_dipole_as_estimate_does():
    """properties.csv / results.json carry the structure dipole as `dipole_rms_D`, the column
    `polarbeam estimate --dipoles` writes (one name per dipole quantity)."""
    from polarbeam.comparison.structure_check import StructurePrediction

    pred = StructurePrediction("CCO", 46.07, 5.1, 0.2, {}, (), dipole_rms_D=1.6)
    cols = pred.columns()
    assert cols["dipole_rms_D"] == 1.6
    assert not [k for k in cols if "dipole_pred" in k]


def test_an_old_computed_csv_is_read_with_one_deprecation_note(tmp_path):
    """A computed.csv of an earlier version (method, alpha, alpha_unit) still feeds the
    comparison, now named qc_method, and the result says once that the names are deprecated."""
    import numpy as np

    from polarbeam.pipeline.analysis import analyze
    from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

    comps = [CompoundTruth("cmp-1", 150.0, 15.0, 0.0, (300.0, 450.0, 600.0))]
    truth = simulate_campaign(
        tmp_path / "camp", comps, spec=InstrumentSpec.talbot_lau(), seed=np.random.default_rng(5)
    )
    toml = truth.path / "campaign.toml"
    (truth.path / "computed.csv").write_text(
        "compound,method,alpha,alpha_unit,dipole_D\ncmp-1,b3lyp,15.5,A3,0.0\n", encoding="utf-8"
    )
    text = toml.read_text(encoding="utf-8")
    data = 'compounds = "compounds.csv"'
    assert data in text
    toml.write_text(text.replace(data, data + '\ncomputed = "computed.csv"', 1), encoding="utf-8")
    result = analyze(toml)
    notes = [n for n in result.notes if "deprecated" in n]
    assert len(notes) == 1 and notes[0].startswith("computed.csv: old column names")
    assert list(result.comparison["qc_method"]) == ["b3lyp"]
    assert result.comparison["alpha_computed_A3"].iloc[0] == 15.5
