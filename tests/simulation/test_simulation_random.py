"""The random campaign behind `polarbeam simulate`: deterministic by seed, valid contract."""

from __future__ import annotations

import pytest

from polarbeam.contract.campaign import load_campaign
from polarbeam.errors import InputError
from polarbeam.simulation.campaigns import LAYOUT_PRESETS, simulate_random_campaign


@pytest.mark.parametrize("layout", sorted(LAYOUT_PRESETS))
def test_same_seed_same_campaign_and_it_loads(tmp_path, layout):
    t1, c1 = simulate_random_campaign(tmp_path / "a", seed=5, layout=layout)
    t2, c2 = simulate_random_campaign(tmp_path / "b", seed=5, layout=layout)
    assert c1 == c2
    assert (t1.path / "shifts.csv").read_bytes() == (t2.path / "shifts.csv").read_bytes()
    camp = load_campaign(t1.path / "campaign.toml")
    assert camp.layout == layout and [cd.name for cd in camp.compounds] == ["sample-1"]
    assert 10 <= c1.alpha_A3 <= 80 and 0 <= c1.dipole_D <= 3


def test_unknown_layout_lists_the_presets(tmp_path):
    with pytest.raises(InputError, match="expected one of talbot-lau, beam-profile, time-domain"):
        simulate_random_campaign(tmp_path, layout="no-such-layout")


def test_simulate_writes_its_truth_and_the_analysis_recovers_it(tmp_path):
    """`polarbeam simulate` leaves truth.json beside campaign.toml; `analyze` of the folder
    recovers α, μ and every α_eff within 4σ of it (a round trip that fails on a wrong truth)."""
    import csv
    import json

    from typer.testing import CliRunner

    from polarbeam.cli.commands import app
    from polarbeam.simulation import TRUTH_FILE

    camp = tmp_path / "camp"
    r = CliRunner().invoke(app, ["simulate", "--out", str(camp), "--seed", "3"])
    assert r.exit_code == 0, r.output
    printed = json.loads(r.stdout)
    assert printed["truth"] == str(camp / TRUTH_FILE)
    truth = json.loads((camp / TRUTH_FILE).read_text(encoding="utf-8"))
    assert truth["written_by"] == "polarbeam simulate" and truth["seed"] == 3
    assert truth["compounds"]["sample-1"]["alpha_A3"] == pytest.approx(printed["alpha_A3"])
    assert {"deflector.length", "instrument.grating_period"} <= set(truth["instrument"])

    res = CliRunner().invoke(
        app, ["analyze", str(camp / "campaign.toml"), "-o", str(tmp_path / "r"), "-q"]
    )
    assert res.exit_code == 0, res.output
    with (tmp_path / "r" / "properties.csv").open(encoding="utf-8") as fh:
        (prop,) = list(csv.DictReader(fh))
    true = truth["compounds"]["sample-1"]
    for key in ("alpha", "dipole"):
        unit = "A3" if key == "alpha" else "D"
        est, err = float(prop[f"{key}_{unit}"]), float(prop[f"{key}_err_{unit}"])
        assert abs(est - true[f"{key}_{unit}"]) < 4 * err, (key, est, err, true)
    with (tmp_path / "r" / "series.csv").open(encoding="utf-8") as fh:
        series = {float(s["temperature_K"]): s for s in csv.DictReader(fh)}
    assert len(series) == len(truth["series"]) == 4
    for s in truth["series"]:
        row = series[s["temperature_K"]]
        pull = (float(row["alpha_eff_A3"]) - s["alpha_eff_A3"]) / float(row["alpha_eff_err_A3"])
        assert abs(pull) < 4, (s, row["alpha_eff_A3"])
