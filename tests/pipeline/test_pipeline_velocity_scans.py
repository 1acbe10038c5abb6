"""Raw scans of a beam with a measured velocity table: the table is used through the fringe
reduction, and the measured visibility checks the velocity model.

The simulated signal scans lose visibility as the true phasor modulus |Z(κ)|/|Z(0)| of an
effusive beam (the scan simulator draws Poisson counts of that fringe). Analysed with the table,
no visibility warning is given and the α_eff pulls are N(0, 1)-sized; analysed with a Gaussian of
the same mean and spread (the table line removed), the visibility departs from the model by more
than 3σ and the check says so with the numbers.
"""

from __future__ import annotations

import numpy as np
import pytest

from polarbeam.constants import alpha_a3_from_si
from polarbeam.contract.campaign import load_campaign
from polarbeam.extraction.context import build_context
from polarbeam.separation.compound import separate
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_scan_campaign


def _results(path):
    c = load_campaign(path / "campaign.toml")
    ctx = build_context(c)
    return [separate(cd, c, ctx) for cd in c.compounds]


@pytest.mark.slow
def test_scans_with_a_table_and_the_visibility_check(tmp_path):
    comps = [CompoundTruth("vs-1", 250.0, 35.0, 0.0, (300.0, 500.0))]
    truth = simulate_scan_campaign(
        tmp_path,
        comps,
        spec=InstrumentSpec.talbot_lau(rel=0.002),
        seed=5,
        velocity_m_s=200.0,
        spread_frac=0.3,
        n_voltages=6,
        scans_per_voltage=2,
        max_signal=2.5,
        signal_per_bin=3000.0,
        table_shape="effusive",
        contrast_slope=-0.5,
    )
    (r,) = _results(tmp_path)
    assert r.status != "failed", r.message
    assert not any("measured visibility departs" in w for w in r.warnings), r.warnings
    for s in r.series:
        assert s.extra["velocity_distribution"] == "table"
        pull = (s.alpha_eff_A3 - truth.alpha_eff_A3[("vs-1", s.temperature_K)]) / (
            alpha_a3_from_si(s.alpha_eff.std_dev)
        )
        assert abs(pull) < 3.5, pull
    toml = (tmp_path / "campaign.toml").read_text(encoding="utf-8")
    (tmp_path / "campaign.toml").write_text(toml.replace('velocities = "velocities.csv"\n', ""))
    (g,) = _results(tmp_path)
    found = [w for w in g.warnings if "measured visibility departs" in w]
    assert found, g.warnings
    assert "measured" in found[0] and "model" in found[0] and "σ)" in found[0]
    assert np.all([s.extra.get("velocity_distribution") is None for s in g.series])
