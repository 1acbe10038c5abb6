"""A stated dipole (compounds.csv dipole_known_D): α from every series, the slope as a check.

Round trip on simulated campaigns (known truth from the project's simulator): with μ stated at
its true value, α is recovered within its error and more precisely than from the free Debye line.
"""

from __future__ import annotations

import csv

import numpy as np
import pytest

from polarbeam.pipeline.analysis import analyze
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign


def _campaign(tmp_path, mu_D: float, stated: str, err: str = "0.01", seed: int = 3):
    comp = CompoundTruth("k-1", 160.0, 18.0, mu_D, (300.0, 400.0, 500.0, 600.0))
    truth = simulate_campaign(
        tmp_path / "c", [comp], spec=InstrumentSpec.talbot_lau(), seed=np.random.default_rng(seed)
    )
    path = truth.path / "compounds.csv"
    rows = list(csv.DictReader(path.open(encoding="utf-8")))
    for r in rows:
        r["dipole_known_D"] = stated
        r["dipole_known_err_D"] = err
    with path.open("w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    return truth


@pytest.mark.parametrize("mu_D", [0.0, 2.0])
def test_alpha_with_the_true_dipole_is_recovered(tmp_path, mu_D):
    truth = _campaign(tmp_path, mu_D, f"{mu_D}")
    free = analyze(_campaign(tmp_path / "free", mu_D, "", "").path / "campaign.toml")
    res = analyze(truth.path / "campaign.toml")
    (c,) = res.compounds
    (f,) = free.compounds
    a, da = c.row()["alpha_A3"], c.row()["alpha_err_A3"]
    assert c.method == "known dipole"
    assert abs(a - 18.0) < 3.5 * da
    # the slope no longer competes with the intercept: α is no longer an extrapolation
    assert da < f.row()["alpha_err_A3"]
    assert c.row()["dipole_D"] == pytest.approx(mu_D)
    assert "stated dipole" in c.message


def test_a_wrong_stated_dipole_is_caught_by_the_slope(tmp_path):
    res = analyze(_campaign(tmp_path, 3.0, "1.0", "0.01").path / "campaign.toml")
    (c,) = res.compounds
    assert c.status == "warning"
    assert "disagrees with the stated dipole_known_D" in c.message


def test_negative_stated_dipole_fails_its_compound(tmp_path):
    res = analyze(_campaign(tmp_path, 1.0, "-0.5").path / "campaign.toml")
    (c,) = res.compounds
    assert c.status == "failed"
    assert "column 'dipole_known_D' expected a number >= 0, found '-0.5'" in c.message
