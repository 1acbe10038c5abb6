"""The whole job on the demo: cross-check columns, computed comparison, JSON, the CLI commands,
and a Monte Carlo check of the linear error propagation."""

from __future__ import annotations

import json
import math
import shutil
from dataclasses import replace
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from typer.testing import CliRunner

from polarbeam._util.optional import missing_reason
from polarbeam.cli.commands import app
from polarbeam.constants import alpha_a3_from_si, debye_from_si
from polarbeam.contract.campaign import load_campaign
from polarbeam.pipeline.analysis import analyze, analyze_campaign
from polarbeam.quantities import Measured

DEMO = Path(__file__).resolve().parents[2] / "examples" / "demo"
runner = CliRunner()


@pytest.fixture(scope="module")
def demo_out(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo")
    res = analyze(DEMO / "campaign.toml", out)
    return res, out


def test_demo_outputs_and_columns(demo_out):
    res, out = demo_out
    assert res.exit_code == 0
    props = pd.read_csv(out / "properties.csv")
    assert list(props.columns[:8]) == [
        "compound",
        "alpha_A3",
        "alpha_err_A3",
        "dipole_D",
        "dipole_err_D",
        "dipole_upper_D",
        "status",
        "message",
    ]
    for col in (
        "alpha_additive_A3",
        "alpha_ahp_A3",
        "alpha_ahc_A3",
        "alpha_bs_A3",
        "alpha_llmr_A3",
        "verdict",
        "alpha_z",
    ):
        assert col in props.columns, col
    series = pd.read_csv(out / "series.csv")
    assert list(series.columns[:6]) == [
        "compound",
        "temperature_K",
        "n_points",
        "alpha_eff_A3",
        "alpha_eff_err_A3",
        "reduced_chi2",
    ]
    assert {"alpha_eff_pred_A3", "alpha_eff_pred_err_A3", "alpha_eff_z"} <= set(series.columns)
    single = props[props.compound == "DM-106"].iloc[0]
    assert math.isnan(single.alpha_A3) and "single source temperature" in single.message
    report = (out / "report.md").read_text()
    assert "Cautions" in report and "safety officer" in report
    assert "force-field charges give rough dipoles" in report


def test_results_json_matches_csv_and_has_budgets(demo_out):
    _, out = demo_out
    doc = json.loads((out / "results.json").read_text())
    assert doc["software"]["name"] == "polarbeam" and doc["software"]["version"]
    props = pd.read_csv(out / "properties.csv").set_index("compound")
    for c in doc["compounds"]:
        if c["alpha"]["A3"] is None:
            continue
        assert math.isclose(c["alpha"]["A3"], props.loc[c["compound"], "alpha_A3"], rel_tol=1e-8)
        # atomic units and SI are the same number in other units (CODATA, scipy.constants)
        assert math.isclose(c["alpha"]["au"] * 0.148184711, c["alpha"]["A3"], rel_tol=1e-8)
        shares = c["alpha_budget"]
        assert math.isclose(sum(shares.values()), 1.0, rel_tol=1e-9)
        assert "fit statistics" in shares
        assert any(k.startswith("deflector:") for k in shares)
        for s in c["series"]:
            assert math.isclose(sum(s["budget"].values()), 1.0, rel_tol=1e-9)


def test_alpha_eff_correlations_are_positive(demo_out):
    res, _ = demo_out
    c = next(c for c in res.compounds if c.compound == "DM-102")
    corr = c.summary()["alpha_eff_correlation"]
    # shared deflector/geometry systematics correlate the series positively
    assert all(corr[i][j] > 0.05 for i in range(len(corr)) for j in range(len(corr)))


def test_computed_comparison(demo_out):
    _, out = demo_out
    cmp_ = pd.read_csv(out / "comparison.csv")
    assert list(cmp_.columns[:7]) == [
        "compound",
        "qc_method",
        "alpha_computed_A3",
        "dipole_computed_D",
        "alpha_measured_A3",
        "alpha_measured_err_A3",
        "alpha_diff_A3",
    ]
    row = cmp_[(cmp_.compound == "DM-101") & (cmp_.qc_method == "b3lyp/def2-svpd")].iloc[0]
    # 98.0 bohr³ × 0.148184711 Å³/bohr³ (CODATA a0³) = 14.522 Å³
    assert math.isclose(row.alpha_computed_A3, 98.0 * 0.148184711, rel_tol=1e-8)
    diff = row.alpha_measured_A3 - row.alpha_computed_A3
    assert math.isclose(row.alpha_diff_A3, diff, abs_tol=1e-7)  # the CSV keeps 10 digits
    assert math.isclose(row.alpha_diff_err_A3, row.alpha_measured_err_A3)
    assert "Measured versus computed chemistry" in (out / "report.md").read_text()


def test_structure_from_sdf_and_mass_warning(tmp_path):
    from rdkit import Chem

    d = tmp_path / "camp"
    shutil.copytree(DEMO, d)
    w = Chem.SDWriter(str(d / "lib.sdf"))
    m = Chem.MolFromSmiles("Clc1ccc(cc1)C#N")
    m.SetProp("_Name", "DM-101")
    w.write(m)
    w.close()
    comp = (d / "compounds.csv").read_text().replace("DM-101,137.57", "DM-101,140.1")
    (d / "compounds.csv").write_text(comp.replace("Clc1ccc(cc1)C#N", ""))
    toml = (
        (d / "campaign.toml")
        .read_text()
        .replace('computed = "computed.csv"', 'computed = "computed.csv"\nstructures = "lib.sdf"')
    )
    (d / "campaign.toml").write_text(toml)
    res = analyze(d / "campaign.toml")
    c = next(c for c in res.compounds if c.compound == "DM-101")
    assert "alpha_additive_A3" in c.extra
    assert any("differs from the structure's average mass" in w for w in c.warnings)


def test_bad_smiles_is_a_note_not_a_failure(tmp_path):
    d = tmp_path / "camp"
    shutil.copytree(DEMO, d)
    comp = (d / "compounds.csv").read_text().replace("Clc1cc(Cl)cc(Cl)c1", "C1CC(")
    (d / "compounds.csv").write_text(comp)
    res = analyze(d / "campaign.toml")
    c = next(c for c in res.compounds if c.compound == "DM-103")
    assert c.status == "warning" and "structure cross-check skipped" in c.message
    assert c.alpha is not None


def test_estimate_cli(tmp_path):
    src = tmp_path / "lib.csv"
    src.write_text("compound,smiles,batch\nw,O,7\nbad,C1CC,8\nm,CO,9\n")
    r = runner.invoke(app, ["estimate", str(src), "--out", str(tmp_path / "est.csv")])
    assert r.exit_code == 1, r.output
    est = pd.read_csv(tmp_path / "est.csv")
    assert list(est.compound) == ["w", "bad", "m"] and list(est.batch) == [7, 8, 9]
    assert list(est.status) == ["ok", "failed", "ok"]
    assert {
        "mass_u",
        "alpha_additive_A3",
        "alpha_ahp_A3",
        "alpha_ahc_A3",
        "alpha_bs_A3",
        "alpha_llmr_A3",
        "smiles",
        "message",
    } <= set(est.columns)


def test_compute_cli_round_trips_into_computed_csv(tmp_path):
    pytest.importorskip("pyscf", reason=missing_reason("pyscf"))
    from polarbeam.chemistry import read_computed

    out = tmp_path / "computed.csv"
    r = runner.invoke(
        app, ["compute", "O", "--method", "hf", "--basis", "sto-3g", "--out", str(out)]
    )
    assert r.exit_code == 0, r.output
    df = read_computed(out)
    assert df.iloc[0]["qc_method"] == "hf/sto-3g" and df.iloc[0]["alpha_computed_A3"] > 0


@pytest.mark.slow
def test_monte_carlo_agrees_with_linear_propagation():
    """Redraw every stated input and every point from its error; the scatter of the results
    must match the linearly propagated σ (the uncertainties package's own check of analytic
    against numerical derivatives, applied to the whole pipeline)."""
    camp = load_campaign(DEMO / "campaign.toml")
    keep = tuple(c for c in camp.compounds if c.name in ("DM-101", "DM-102"))
    camp = replace(camp, compounds=keep, settings=replace(camp.settings, structure_check=False))
    ref = analyze_campaign(camp)
    rng = np.random.default_rng(5)
    draws = {"a101": [], "m101": [], "e102": []}
    for _ in range(250):
        stated = {
            k: Measured(m.value + m.error * rng.standard_normal(), m.error)
            for k, m in camp.stated.items()
        }
        comps = []
        for cd in camp.compounds:
            series = []
            for s in cd.series:
                dv = s.velocity.error * rng.standard_normal()
                dt = s.temperature.error * rng.standard_normal()
                series.append(
                    replace(
                        s,
                        values=s.values + s.errors * rng.standard_normal(s.values.size),
                        velocities=s.velocities + dv,
                        velocity=Measured(s.velocity.value + dv, s.velocity.error),
                        temperature=Measured(s.temperature.value + dt, s.temperature.error),
                    )
                )
            mass = Measured(cd.mass.value + cd.mass.error * rng.standard_normal(), cd.mass.error)
            comps.append(replace(cd, series=tuple(series), mass=mass))
        r = analyze_campaign(replace(camp, stated=stated, compounds=tuple(comps)))
        c101, c102 = r.compounds
        draws["a101"].append(alpha_a3_from_si(c101.alpha.nominal_value))
        draws["m101"].append(debye_from_si(c101.dipole.nominal_value))
        draws["e102"].append(c102.series[0].alpha_eff_A3)
    c101, c102 = ref.compounds
    linear = {
        "a101": alpha_a3_from_si(c101.alpha.std_dev),
        "m101": debye_from_si(c101.dipole.std_dev),
        "e102": c102.series[0].alpha_eff_err_A3,
    }
    for k, sigma in linear.items():
        mc = float(np.std(draws[k], ddof=1))
        # 250 draws: the MC standard deviation itself is uncertain by ~4.5 %
        assert abs(mc / sigma - 1) < 0.15, (k, mc, sigma)


def test_mass_from_structure_when_not_stated(tmp_path):
    d = tmp_path / "camp"
    shutil.copytree(DEMO, d)
    comp = pd.read_csv(d / "compounds.csv")
    comp = comp.drop(columns=["mass_u"])
    comp.to_csv(d / "compounds.csv", index=False)
    res = analyze(d / "campaign.toml")
    c = next(c for c in res.compounds if c.compound == "DM-102")
    # biphenyl C12H10: average molecular mass 154.21 u (IUPAC atomic weights via RDKit)
    assert abs(c.mass_u - 154.21) < 0.01 and c.alpha is not None
    toml = (d / "campaign.toml").read_text() + '\n[analysis]\nmass = "monoisotopic"\n'
    (d / "campaign.toml").write_text(toml)
    c = next(c for c in analyze(d / "campaign.toml").compounds if c.compound == "DM-102")
    assert abs(c.mass_u - 154.0783) < 1e-3  # 12 × 12 + 10 × 1.007825 (monoisotopic)


def test_no_mass_and_no_structure_fails_only_that_compound(tmp_path):
    d = tmp_path / "camp"
    shutil.copytree(DEMO, d)
    text = (d / "compounds.csv").read_text().replace("DM-103,181.45", "DM-103,")
    text = text.replace("Clc1cc(Cl)cc(Cl)c1", "")
    (d / "compounds.csv").write_text(text)
    by = {c.compound: c for c in analyze(d / "campaign.toml").compounds}
    assert by["DM-103"].status == "failed" and "mass_u" in by["DM-103"].message
    assert by["DM-102"].status != "failed"
