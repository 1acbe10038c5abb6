"""Campaign planning: the worked example end to end, the phase-noise input and the error branches
of a planning campaign."""

from __future__ import annotations

import json
import math
import re
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from polarbeam.cli.commands import app
from polarbeam.errors import InputError
from polarbeam.planning import (
    load_plan,
    make_plan,
    plan_campaign,
)

runner = CliRunner()
EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "plan" / "campaign.toml"


def test_worked_example_plan_then_analyze_rehearsal(tmp_path):
    out = tmp_path / "plan"
    r = runner.invoke(app, ["plan", str(EXAMPLE), "--out", str(out)])
    assert r.exit_code == 0, r.output
    table = pd.read_csv(out / "plan.csv")
    assert list(table.columns[:8]) == [
        "compound",
        "temperature_K",
        "alpha_eff_pred_A3",
        "sigma_alpha_eff_pred_A3",
        "voltage_max_V",
        "n_voltages",
        "scans_per_voltage",
        "beam_time_h",
    ]
    assert {"alpha_expected_err_A3", "dipole_expected_err_D"} <= set(table.columns)
    # the pinned contract column and its ``_err`` twin carry the same number
    assert (table["sigma_alpha_eff_pred_A3"] == table["alpha_eff_expected_err_A3"]).all()
    assert [c for c in table.columns if c.startswith("sigma_")] == ["sigma_alpha_eff_pred_A3"]
    assert set(table["compound"]) == {"DM-101", "DM-102", "DM-103", "DM-104", "DM-105", "DM-107"}
    assert table.groupby("compound").size().eq(3).all()
    for name in table["compound"].unique():
        png = out / f"plan_{name}.png"
        assert png.is_file() and png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    doc = json.loads((out / "plan.json").read_text())
    assert doc["compounds"][0]["temperature_sets"][0]["label"] == "best (chosen)"
    # one error naming (`_err`), one dipole name (`dipole_rms_D`, as `estimate` writes)
    # one error naming: no σ-named key in plan.json; plan.csv's only one is the pinned column
    assert "sigma_" not in json.dumps(doc)
    assert {"dipole_rms_D", "dipole_expected_err_D"} <= set(doc["compounds"][0])
    assert "alpha_eff_expected_err_A3" in doc["compounds"][0]["series"][0]
    assert "dipole_rms_D" in table.columns and "dipole_pred_D" not in table.columns
    md = (out / "plan.md").read_text()
    assert "safety officer" in md
    r = runner.invoke(
        app, ["analyze", str(out / "rehearsal" / "campaign.toml"), "--out", str(tmp_path / "res")]
    )
    assert r.exit_code == 0, r.output
    series = pd.read_csv(tmp_path / "res" / "series.csv")
    m = series.merge(table, on=["compound", "temperature_K"])
    assert len(m) == len(table)
    ratio = m["alpha_eff_err_A3"] / m["alpha_eff_expected_err_A3"]
    print("reported / planned σ(α_eff):", np.round(ratio.to_numpy(), 3))
    assert ratio.between(0.7, 1.3).all()
    truth = pd.read_csv(out / "rehearsal" / "truth.csv", comment="#")
    m = m.merge(truth, on=["compound", "temperature_K"])
    pulls = (m["alpha_eff_A3"] - m["alpha_eff_true_A3"]) / m["alpha_eff_err_A3"]
    assert np.all(np.abs(pulls) < 4.5)
    props = pd.read_csv(tmp_path / "res" / "properties.csv").set_index("compound")
    planned = table.drop_duplicates("compound").set_index("compound")
    ratio_a = props["alpha_err_A3"] / planned["alpha_expected_err_A3"]
    print("reported / planned σ(α):", np.round(ratio_a.to_numpy(), 3))
    assert ratio_a.between(0.7, 1.3).all()


def test_phase_noise_input(tmp_path):
    text = EXAMPLE.read_text()
    text = re.sub(r"count_rate = .*\n", 'phase_noise = "0.08 rad"\n', text)
    text = re.sub(r"dark_rate = .*\n", "", text)
    (tmp_path / "campaign.toml").write_text(text)
    (tmp_path / "compounds.csv").write_text("compound,mass_u,alpha_A3\npn-1,200,30\n")
    camp, plan, comps = load_plan(tmp_path / "campaign.toml")
    plan = replace(plan, temperatures_K=(400.0, 600.0), temperature_range_K=None)
    p = plan_campaign(camp, plan, comps)
    s = p.compounds[0].series[0]
    assert math.sqrt(s.model.reference_variance) == pytest.approx(0.08, rel=1e-9)


# ---------------------------------------------------------------------------------------------
# Error branches
# ---------------------------------------------------------------------------------------------


def _write(tmp_path, plan_block: str, compounds: str = "compound,mass_u,alpha_A3\nx-1,200,30\n"):
    text = EXAMPLE.read_text().split("[plan]")[0] + plan_block
    (tmp_path / "campaign.toml").write_text(text)
    (tmp_path / "compounds.csv").write_text(compounds)
    return tmp_path / "campaign.toml"


_GOOD = (
    '[plan]\ntemperatures_K = [400, 600]\nvelocity = "210 ± 1 m/s"\nvelocity_spread = "20 m/s"\n'
    'visibility = 0.25\ncount_rate = "240 counts/s"\nscan_time = "20 s"\n'
)


@pytest.mark.parametrize(
    ("block", "pattern"),
    [
        ("", r"campaign\.toml \[plan\]: required table missing"),
        (_GOOD.replace("visibility = 0.25\n", ""), r"\[plan\] visibility: required key missing"),
        (_GOOD.replace('scan_time = "20 s"\n', ""), r"\[plan\] scan_time: required key missing"),
        (_GOOD.replace('velocity = "210 ± 1 m/s"\n', ""), r"\[plan\] velocity: required key"),
        (_GOOD + "visiblity = 0.3\n", r"unknown key\(s\) in \[plan\]: 'visiblity'"),
        (_GOOD + 'phase_noise = "0.1 rad"\n', r"expected exactly one of count_rate"),
        (_GOOD.replace("temperatures_K = [400, 600]\n", ""), r"temperatures_K: required key"),
        (_GOOD + "temperature_range_K = [300, 600]\n", r"expected one of them, found both"),
        (_GOOD + "visibility_floor = 0.4\n", r"visibility_floor: expected a value below"),
        (_GOOD + "ladder = [100, 0]\n", r"\[plan\] ladder: expected"),
        (_GOOD + 'phase_limit = "3 m"\n', r"\[plan\] phase_limit: expected a unit of rad"),
        (
            _GOOD.replace('velocity = "210 ± 1 m/s"', 'velocity = ["210 m/s"]'),
            r"\[plan\] velocity: expected 2 values",
        ),
        (_GOOD + "n_voltages = 1\n", r"\[plan\] n_voltages: expected an integer in \[2, 40\]"),
    ],
)
def test_plan_table_errors(tmp_path, block, pattern):
    path = _write(tmp_path, block)
    with pytest.raises(InputError, match=pattern):
        load_plan(path)


def test_data_and_layout_errors(tmp_path):
    path = _write(tmp_path, _GOOD)
    text = path.read_text().replace(
        'compounds = "compounds.csv"', 'compounds = "compounds.csv"\nshifts = "shifts.csv"'
    )
    path.write_text(text)
    with pytest.raises(InputError, match=r"\[data\] shifts: a planning campaign has no measure"):
        load_plan(path)
    prof = (
        '[instrument]\nlayout = "beam-profile"\ndetector_position = "1.4 m"\n[deflector]\n'
        'model = "uniform"\nentrance = "0.3 m"\nlength = "0.1 m"\nfield_factor = "1e8 m^-3"\n'
        '[data]\ncompounds = "compounds.csv"\n' + _GOOD
    )
    path.write_text(prof)
    with pytest.raises(InputError, match=r"planning needs a fringe layout"):
        load_plan(path)


def test_compound_without_structure_or_alpha_fails_alone(tmp_path):
    comps = "compound,mass_u,smiles,alpha_A3\nok-1,200,,30\nbare-2,180,,\n"
    path = _write(tmp_path, _GOOD, comps)
    p = make_plan(path)
    status = {c.compound: c for c in p.compounds}
    assert status["ok-1"].status != "failed"
    assert status["bare-2"].status == "failed"
    assert re.fullmatch(
        r"compounds\.csv line 3: compound 'bare-2' has no structure \(smiles column or a \[data\] "
        r"structures record\) and no stated alpha_A3; expected one of them",
        status["bare-2"].message,
    )
    r = runner.invoke(app, ["plan", str(path), "--out", str(tmp_path / "out"), "--no-rehearsal"])
    assert r.exit_code == 1
    assert "failed: bare-2: compounds.csv line 3" in r.output
    assert set(pd.read_csv(tmp_path / "out" / "plan.csv")["compound"]) == {"ok-1"}
    path = _write(tmp_path, _GOOD, "compound,mass_u\nbare-3,100\n")
    r = runner.invoke(app, ["plan", str(path), "--out", str(tmp_path / "out2")])
    assert r.exit_code == 2


def test_cli_structural_error_is_one_line(tmp_path):
    path = _write(tmp_path, _GOOD.replace("visibility = 0.25\n", ""))
    r = runner.invoke(app, ["plan", str(path), "--out", str(tmp_path / "o")])
    assert r.exit_code == 2
    lines = [ln for ln in r.output.splitlines() if ln.strip()]
    assert len(lines) == 1 and lines[0].startswith("error: campaign.toml [plan] visibility")
    assert "Traceback" not in r.output
