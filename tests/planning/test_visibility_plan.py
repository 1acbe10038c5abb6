"""Power ladders for light-grating visibility curves by Fisher information."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from polarbeam.beam.distributions import GaussianVelocity
from polarbeam.beam.talbot import LightGrating, MaterialGrating, TalbotLauInterferometer
from polarbeam.cli.commands import app
from polarbeam.constants import AMU
from polarbeam.extraction.visibility import rician_nll
from polarbeam.planning.visibility import design_power_ladder, rician_fisher, visibility_fisher

TL = TalbotLauInterferometer(
    0.105, 266e-9, MaterialGrating(0.42), LightGrating(532e-9, 900e-6), MaterialGrating(0.42)
)


def test_rician_fisher_limits_and_monte_carlo():
    s = 0.01
    info = rician_fisher([0.0, 0.3], s)
    assert info[0] == pytest.approx(0.0, abs=1e-9)  # ∂ν ln p = 0 at ν = 0 (derived here)
    assert info[1] == pytest.approx(1 / s**2, rel=1e-3)  # Gaussian limit ν ≫ σ
    # Monte Carlo: the variance of the score at ν = 1.5 σ
    rng = np.random.default_rng(1)
    nu, h = 0.015, 1e-6
    v = np.abs(nu + s * (rng.standard_normal(200000) + 1j * rng.standard_normal(200000)))
    score = -(rician_nll(v, nu + h, s) - rician_nll(v, nu - h, s)) / (2 * h)
    assert rician_fisher([nu], s)[0] == pytest.approx(np.var(score), rel=0.02)


def test_designed_ladder_beats_the_even_ladder():
    dist = GaussianVelocity(170.0, 20.0)
    plan = design_power_ladder(TL, 1500 * AMU, dist, 120.0, 5.0, 0.01, 10.0, 10)
    assert plan.powers.size == 10 and plan.powers.max() <= 10.0
    assert plan.sigma_alpha_A3 * plan.sigma_im_A3 < plan.even_sigma_alpha_A3 * plan.even_sigma_im_A3
    f_opt, _ = visibility_fisher(TL, 1500 * AMU, dist, plan.powers, 120.0, 5.0, 0.01)
    f_even, _ = visibility_fisher(TL, 1500 * AMU, dist, np.linspace(1, 10, 10), 120.0, 5.0, 0.01)
    assert np.linalg.det(f_opt) > np.linalg.det(f_even)
    assert plan.predicted_quantum.shape == plan.powers.shape


def _planning_campaign(folder: Path, extra_plan: str = "", compounds_alpha=True) -> Path:
    src = Path(__file__).resolve().parents[2] / "examples" / "plan"
    text = (src / "campaign.toml").read_text(encoding="utf-8")
    text = text.replace(
        "[data]",
        '[gratings]\nfirst = "material"\nsecond = "light"\nthird = "material"\n'
        'open_fraction = "0.42 ± 0.02"\nlaser_wavelength = "532 nm"\n'
        'laser_waist_vertical = "900 ± 30 um"\npower_scale = "1 ± 0.03"\n\n[data]',
    )
    text = text.replace("seed = 2029", "seed = 2029\n" + extra_plan)
    (folder / "campaign.toml").write_text(text, encoding="utf-8")
    rows = ["compound,mass_u,alpha_A3,alpha_opt_A3,sigma_abs_m2", "L-1,900,50,60,1e-22"]
    rows.append("L-2,1200,70,,0" if not compounds_alpha else "L-2,1200,70,80,0")
    (folder / "compounds.csv").write_text("\n".join(rows) + "\n", encoding="utf-8")
    return folder / "campaign.toml"


def test_polarbeam_plan_writes_power_ladders(tmp_path):
    camp = _planning_campaign(
        tmp_path,
        'laser_power_max = "10 W"\nn_powers = 6\nvisibility_noise = 0.01',
        compounds_alpha=False,
    )
    result = CliRunner().invoke(app, ["plan", str(camp), "--out", str(tmp_path / "out")])
    assert result.exit_code == 0, result.output
    with (tmp_path / "out" / "visibility_plan.csv").open(newline="", encoding="utf-8") as h:
        rows = list(csv.DictReader(h))
    assert {r["compound"] for r in rows} == {"L-1"} and len(rows) == 6
    assert all(0 < float(r["laser_power_W"]) <= 10 for r in rows)
    assert float(rows[0]["alpha_opt_err_A3"]) <= float(rows[0]["alpha_opt_err_even_ladder_A3"])
    record = json.loads((tmp_path / "out" / "plan.json").read_text(encoding="utf-8"))
    ladders = {x["compound"]: x for x in record["visibility_ladders"]}
    assert ladders["L-2"]["status"] == "failed"
    assert "column 'alpha_opt_A3' expected" in ladders["L-2"]["message"]


def test_plan_without_power_maximum_is_one_line(tmp_path):
    camp = _planning_campaign(tmp_path)
    result = CliRunner().invoke(app, ["plan", str(camp), "--out", str(tmp_path / "out")])
    assert result.exit_code == 2
    errors = [ln for ln in result.output.splitlines() if ln.startswith("error:")]
    assert errors == [
        'error: campaign.toml [plan] laser_power_max: required with [gratings] (e.g. "10 W")'
    ]
