"""Time-of-flight outputs: the example campaign loads with a fitted table per series, and the
``velocities.csv`` a run writes is accepted back as ``[data] velocities`` (same columns), giving
the same α_eff (the flight-length and offset errors then have to be stated as velocity_err_m_s).
"""

from __future__ import annotations

import csv
import json
import shutil
from pathlib import Path

import numpy as np
import pytest

import polarbeam
from polarbeam.beam.distributions import TabulatedVelocity
from polarbeam.contract.campaign import load_campaign

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "velocity" / "tof"


def test_example_campaign_loads_with_fitted_tables():
    c = load_campaign(EXAMPLE / "campaign.toml")
    series = [s for cd in c.compounds for s in cd.series]
    assert len(series) == 9 and all(cd.problem is None for cd in c.compounds)
    for s in series:
        assert isinstance(s.distribution, TabulatedVelocity)
        tags = {t for t, _ in s.velocity_terms}
        assert {"beam: flight_length", "beam: time_offset"} <= tags
        # the invented beam: mean 620 m/s (make_data.py); true flight length 0.12 % short
        assert s.distribution.mean == pytest.approx(620.0, rel=0.01)
        tf = s.time_of_flight
        # ⟨v⁻²⟩ of the table is the fitted one, its error includes 2·δL/L = 0.32 %
        v, w = s.distribution.nodes()
        assert np.sum(w / v**2) == pytest.approx(tf.mean_inverse_square, rel=1e-9)
        assert tf.mean_inverse_square_err / tf.mean_inverse_square > 2 * 0.002 / 1.25


@pytest.mark.slow
def test_written_velocities_are_a_valid_input_table(tmp_path):
    folder = tmp_path / "tof"
    shutil.copytree(EXAMPLE, folder)
    first = polarbeam.analyze(folder / "campaign.toml", out=tmp_path / "out1")
    written = tmp_path / "out1" / "velocities.csv"
    with written.open(newline="", encoding="utf-8") as h:
        rows = list(csv.DictReader(h))
    assert list(rows[0]) == ["compound", "temperature_K", "velocity_m_s", "weight"]
    doc = json.loads((tmp_path / "out1" / "results.json").read_text(encoding="utf-8"))
    tof = doc["compounds"][0]["series"][0]["time_of_flight"]
    assert tof["mean_inverse_square_err_s2_m2"] > 0 and tof["fit"]["a_m_s_err"] > 0
    # the same campaign with the written tables instead of the traces
    shutil.copy(written, folder / "velocities.csv")
    text = (folder / "campaign.toml").read_text(encoding="utf-8")
    text = text.replace('time_of_flight = "tof.csv"', 'velocities = "velocities.csv"')
    text = text[: text.index("\n[beam]")] + "\n"
    (folder / "campaign.toml").write_text(text, encoding="utf-8")
    second = polarbeam.analyze(folder / "campaign.toml")
    a1 = [s.alpha_eff.nominal_value for c in first.compounds for s in c.series]
    a2 = [s.alpha_eff.nominal_value for c in second.compounds for s in c.series]
    np.testing.assert_allclose(a2, a1, rtol=1e-6)
