"""Calibration of the deflector with reference compounds.

The simulator draws every systematic from its stated error — geometry, velocity calibration of
each series, temperature, mass, and the references' "published" α and μ — so honest error bars
give |pull| < 1 in 68.3 % of cases (Gaussian 1σ coverage, common practice for validating error
bars).  The references' known values in the table test come from reference_values/ (CRC Handbook
"Atomic and Molecular Polarizabilities" and "Dipole Moments", quoted there from memory); the
Langevin–Debye term uses scipy.constants' Boltzmann constant (CODATA).
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from polarbeam.calibration.calibrate import (
    gls_log_mean,
    known_alpha_eff,
    load_reference_tables,
    reference_values,
)
from polarbeam.cli.commands import app
from polarbeam.constants import alpha_a3_from_si, alpha_si_from_a3, si_from_debye
from polarbeam.contract.campaign import load_campaign
from polarbeam.errors import InputError
from polarbeam.pipeline.analysis import analyze
from polarbeam.simulation.calibration import calibration_campaign
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign
from polarbeam.uncertain import variance_budget

runner = CliRunner()
N_CAMPAIGNS = 100


def _edit_csv(path: Path, compound: str, column: str, value: str) -> None:
    lines = path.read_text().splitlines()
    head = lines[0].split(",")
    i = head.index(column)
    for n, ln in enumerate(lines[1:], start=1):
        cells = ln.split(",")
        if cells[0] == compound:
            cells[i] = value
            lines[n] = ",".join(cells)
    path.write_text("\n".join(lines) + "\n")


@pytest.fixture(scope="module")
def pulls(tmp_path_factory):
    rng = np.random.default_rng(20261207)
    out = {"alpha_eff": [], "alpha": [], "g": [], "reference_alpha_eff": []}
    for i in range(N_CAMPAIGNS):
        truth = calibration_campaign(tmp_path_factory.mktemp(f"cal{i}"), rng, 1 + i % 2)
        res = analyze(truth.path / "campaign.toml")
        cal = res.calibration
        out["g"].append(
            (cal["field_factor_per_m3"] - truth.field_factor) / cal["field_factor_err_per_m3"]
        )
        for c in res.compounds:
            assert c.status != "failed", c.message
            t = truth.simulation.compounds[c.compound]
            key = "reference_alpha_eff" if c.extra.get("role") == "reference" else "alpha_eff"
            for s in c.series:
                ref = truth.simulation.alpha_eff_A3[(c.compound, s.temperature_K)]
                out[key].append((s.alpha_eff_A3 - ref) / s.alpha_eff_err_A3)
            if c.extra.get("role") != "reference" and c.alpha is not None:
                a, da = (alpha_a3_from_si(x) for x in (c.alpha.nominal_value, c.alpha.std_dev))
                out["alpha"].append((a - t.alpha_A3) / da)
    return {k: np.array(v) for k, v in out.items()}


@pytest.mark.parametrize("name", ["alpha_eff", "alpha", "g", "reference_alpha_eff"])
def test_round_trip_pulls_with_references(pulls, name):
    p = pulls[name]
    frac = float(np.mean(np.abs(p) < 1))
    print(f"{name}: n={p.size} fraction |pull|<1 = {frac:.3f}, mean {p.mean():+.3f}")
    assert p.size >= 80, p.size
    assert abs(frac - 0.683) < 0.07
    # no bias: pulls of one campaign share its calibration, so allow for that correlation
    assert abs(p.mean()) < 4.0 / math.sqrt(p.size) + 0.1


@pytest.fixture
def one_ref(tmp_path):
    truth = calibration_campaign(tmp_path / "one", np.random.default_rng(3), 1, layout="talbot-lau")
    return truth


@pytest.fixture
def two_refs(tmp_path):
    return calibration_campaign(
        tmp_path / "two", np.random.default_rng(8), 2, layout="beam-profile"
    )


def test_geometry_cancels_and_calibrated_g_is_correlated(one_ref, tmp_path):
    res = analyze(one_ref.path / "campaign.toml", tmp_path / "out")
    ref = next(c for c in res.compounds if c.extra.get("role") == "reference")
    unknowns = [c for c in res.compounds if c.extra.get("role") != "reference"]
    for c in unknowns:
        for s in c.series:
            budget = variance_budget(s.alpha_eff)
            # inputs entering only through C cancel between reference and unknown ...
            for tag in ("deflector: length", "deflector: entrance"):
                assert budget.get(tag, 0.0) < 1e-12, (tag, budget)
            # ... what the reference brings does not
            assert budget["reference α: reference-1"] > 0
            assert any(k.startswith("velocity: reference-1") for k in budget)
    cal = res.calibration
    corr = cal["field_factor_correlation_with_inputs"]
    # g ∝ 1/L at fixed measured α_eff·C: the correlation with the length is negative and equals
    # −(σ_L/L)/(σ_g/g) (the stated length error is the only length input)
    st = res.stated_inputs["deflector.length"]
    rel_g = cal["field_factor_err_per_m3"] / cal["field_factor_per_m3"]
    expect = -st["dlnC_dp"] * st["error"] / rel_g
    assert math.isclose(corr["deflector: length"], expect, rel_tol=1e-6)
    # a single reference series is reproduced exactly, its error being the known value's
    data = json.loads((tmp_path / "out" / "results.json").read_text())
    assert data["calibration"]["quantity"] == "field_factor"
    assert "reference" in (tmp_path / "out" / "properties.csv").read_text()
    series_csv = (tmp_path / "out" / "series.csv").read_text()
    assert "reference_alpha_eff_A3" in series_csv and "reference_pull" in series_csv
    assert ref.message.startswith("reference: calibrates the field")


def test_single_reference_series_is_reproduced_exactly(tmp_path):
    comps = [
        CompoundTruth("ref", 84.0, 1.64, 0.0, (300.0,)),
        CompoundTruth("sample", 200.0, 25.0, 1.5, (300.0, 500.0)),
    ]
    truth = simulate_campaign(tmp_path, comps, spec=InstrumentSpec.talbot_lau(), seed=4)
    toml = truth.path / "campaign.toml"
    toml.write_text(
        "\n".join(ln for ln in toml.read_text().splitlines() if "field_factor" not in ln)
    )
    comp = truth.path / "compounds.csv"
    lines = comp.read_text().splitlines()
    lines[0] += ",reference,reference_alpha_A3,reference_alpha_err_A3"
    lines[1] += ",true,1.64,0.02"
    lines[2] += ",false,,"
    comp.write_text("\n".join(lines) + "\n")
    res = analyze(toml)
    (s,) = next(c for c in res.compounds if c.compound == "ref").series
    assert math.isclose(s.alpha_eff_A3, 1.64, rel_tol=1e-9)
    assert math.isclose(s.alpha_eff_err_A3, 0.02, rel_tol=1e-6)
    assert res.calibration["ndof"] == 0
    assert "no consistency check" in " ".join(res.notes)


def test_references_from_reference_tables(tmp_path):
    # acetonitrile: α = 4.40 ± 0.08 Å³ and μ = 3.925 ± 0.005 D in reference_values/ (CRC);
    # benzene: α = 10.32 ± 0.35 Å³ and not in dipoles.csv (non-polar)
    alphas, dipoles = load_reference_tables()
    assert alphas["acetonitrile"][:2] == (4.40, 0.08) and dipoles["acetonitrile"][:2] == (
        3.925,
        0.005,
    )
    assert "benzene" in alphas and "benzene" not in dipoles
    comps = [
        CompoundTruth("acetonitrile", 41.05, 4.40, 3.925, (350.0, 500.0)),
        CompoundTruth("benzene", 78.11, 10.32, 0.0, (400.0,)),
        CompoundTruth("sample", 300.0, 40.0, 0.0, (300.0, 450.0)),
    ]
    spec = InstrumentSpec.talbot_lau(rel=0.005)
    truth = simulate_campaign(tmp_path, comps, spec=spec, seed=np.random.default_rng(11))
    toml = truth.path / "campaign.toml"
    toml.write_text(
        "\n".join(ln for ln in toml.read_text().splitlines() if "field_factor" not in ln)
    )
    comp = truth.path / "compounds.csv"
    lines = comp.read_text().splitlines()
    lines[0] += ",reference,reference_alpha_A3,reference_dipole_D"
    lines[1] += ",yes,,"
    lines[2] += ",true,,"
    lines[3] += ",false,,"
    comp.write_text("\n".join(lines) + "\n")
    c = load_campaign(toml)
    values, problems = reference_values(c)
    assert not problems
    assert math.isclose(values["acetonitrile"].dipole.value, si_from_debye(3.925), rel_tol=1e-12)
    assert "reference_values/polarizabilities.csv" in values["benzene"].alpha_source
    assert "assumed non-polar" in values["benzene"].dipole_source
    res = analyze(toml)
    by = {x.compound: x for x in res.compounds}
    assert (
        by["benzene"].extra.get("role") == "reference"
        and "assumed non-polar" in by["benzene"].message
    )
    g = res.calibration
    assert abs(g["field_factor_per_m3"] - truth.instrument["deflector.field_factor"]) < (
        4 * g["field_factor_err_per_m3"]
    )
    # the known α_eff of acetonitrile at 350 K includes μ²/(3kT) = 8.048 Å³ × 3.925² × 300/350
    (s350, _s500) = by["acetonitrile"].series
    expect = 4.40 + 8.048 * 3.925**2 * 300.0 / 350.0
    assert math.isclose(s350.extra["reference_alpha_eff_A3"], expect, rel_tol=2e-4)


def test_known_alpha_eff_langevin_debye():
    # 1 D at 300 K adds 8.048 Å³ (README; k_B and ε0 from scipy.constants CODATA)
    a = known_alpha_eff(alpha_si_from_a3(10.0), si_from_debye(1.0), 300.0)
    assert math.isclose(alpha_a3_from_si(a), 18.048, rel_tol=1e-4)


def test_gls_log_mean_weighted_mean_of_independent_values():
    from uncertainties import ufloat

    vals = [ufloat(2.0, 0.02), ufloat(2.1, 0.042)]
    m, chi2, ndof = gls_log_mean(vals)
    # independent: inverse-variance weights of ln x with σ_ln = σ/x
    w = np.array([(2.0 / 0.02) ** 2, (2.1 / 0.042) ** 2])
    ln = np.log([2.0, 2.1])
    expect = float(np.sum(w * ln) / w.sum())
    assert math.isclose(m.nominal_value, expect, rel_tol=1e-12)
    assert math.isclose(m.std_dev, 1 / math.sqrt(w.sum()), rel_tol=1e-9)
    assert math.isclose(chi2, float(np.sum(w * (ln - expect) ** 2)), rel_tol=1e-9) and ndof == 1
    # a fully shared error adds to the mean's error but not to χ²
    shared = ufloat(1.0, 0.05, tag="shared")
    m2, chi2b, _ = gls_log_mean([v * shared for v in vals])
    assert math.isclose(m2.nominal_value, expect, rel_tol=1e-9)
    assert math.isclose(chi2b, chi2, rel_tol=1e-6)
    assert math.isclose(m2.std_dev**2, m.std_dev**2 + 0.05**2, rel_tol=1e-6)


def test_two_references_consistent_then_inconsistent(two_refs, tmp_path):
    res = analyze(two_refs.path / "campaign.toml")
    assert not any("inconsistent" in n for n in res.notes)
    assert res.calibration["between_references"]["ndof"] == 1
    comp = two_refs.path / "compounds.csv"
    a = two_refs.references["reference-2"][0]
    _edit_csv(comp, "reference-2", "reference_alpha_A3", f"{a * 1.5:.6g}")
    res = analyze(two_refs.path / "campaign.toml", tmp_path / "out")
    warn = [n for n in res.notes if n.startswith("inconsistent references")]
    assert warn and "disagree" in warn[0]
    assert res.calibration["between_references"]["p_value"] < 0.01
    data = json.loads((tmp_path / "out" / "results.json").read_text())
    assert data["calibration"]["warnings"] and "inconsistent" in data["calibration"]["warnings"][0]
    # Birge scaling inflates the calibration error by sqrt(χ²/ν)
    toml = two_refs.path / "campaign.toml"
    toml.write_text(toml.read_text() + '\n[analysis]\nscale_errors = "birge"\n')
    birge = analyze(toml).calibration
    assert birge["birge_factor"] > 1
    assert birge["field_factor_err_per_m3"] > res.calibration["field_factor_err_per_m3"]


def test_no_reference_and_no_field_factor_is_input_error(one_ref, tmp_path):
    comp = one_ref.path / "compounds.csv"
    _edit_csv(comp, "reference-1", "reference", "false")
    toml = one_ref.path / "campaign.toml"
    pattern = r"field_factor: missing and no measured compound is a reference"
    with pytest.raises(InputError, match=pattern):
        analyze(toml)
    r = runner.invoke(app, ["analyze", str(toml), "--out", str(tmp_path / "o"), "--quiet"])
    assert r.exit_code == 2 and "Traceback" not in r.output
    lines = r.output.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ") and "field_factor" in lines[0]
    r = runner.invoke(app, ["field", str(toml), "--voltage", "1 kV"])
    assert r.exit_code == 2 and "field_factor: missing" in r.output


def test_reference_without_known_alpha_is_compound_level(one_ref, tmp_path):
    comp = one_ref.path / "compounds.csv"
    _edit_csv(comp, "reference-1", "reference_alpha_A3", "")
    res = analyze(one_ref.path / "campaign.toml")
    by = {c.compound: c for c in res.compounds}
    ref = by["reference-1"]
    assert ref.status == "failed"
    assert "compounds.csv line 2: reference compound 'reference-1' has no known α" in ref.message
    assert "reference_alpha_A3" in ref.message
    for name in ("sample-1", "sample-2"):
        assert by[name].status == "failed" and "not calibrated" in by[name].message
    assert res.exit_code == 2


def test_bad_reference_flag_names_line_and_column(two_refs):
    _edit_csv(two_refs.path / "compounds.csv", "reference-2", "reference", "maybe")
    res = analyze(two_refs.path / "campaign.toml")
    by = {c.compound: c for c in res.compounds}
    assert by["reference-2"].status == "failed"
    assert (
        "line 3: column 'reference' expected true or false, found 'maybe'"
        in by["reference-2"].message
    )
    assert by["reference-1"].extra.get("role") == "reference" and by["sample-1"].status != "failed"
    assert res.exit_code == 1


def test_references_scale_a_stated_model(tmp_path):
    # A stated field factor 10 % too high: the references find the scale and the unknowns are
    # recovered; without them the unknowns would be 10 % low.
    truth = calibration_campaign(tmp_path / "s", np.random.default_rng(21), 2, layout="talbot-lau")
    toml = truth.path / "campaign.toml"
    g_true = truth.field_factor
    text = toml.read_text().replace(
        'model = "uniform"', f'model = "uniform"\nfield_factor = "{1.1 * g_true:.8g} ± 1e5 m^-3"'
    )
    toml.write_text(text)
    res = analyze(toml)
    cal = res.calibration
    assert cal["quantity"] == "field_scale"
    assert abs(cal["field_scale"] - 1 / 1.1) < 4 * cal["field_scale_err"]
    assert abs(cal["field_factor_per_m3"] - g_true) < 4 * cal["field_factor_err_per_m3"]
    # the stated field factor's own error cancels in the unknowns
    for c in res.compounds:
        if c.extra.get("role") != "reference":
            for s in c.series:
                assert variance_budget(s.alpha_eff).get("deflector: field_factor", 0.0) < 1e-12
    # check mode: stated field kept, references compared (their pulls show the 10 % offset)
    toml.write_text(text + '\n[analysis]\ncalibration = "check"\n')
    res = analyze(toml)
    assert res.calibration is None
    refs = [c for c in res.compounds if c.extra.get("role") == "reference"]
    assert refs and all("check only" in c.message for c in refs)
    pulls = [s.extra["reference_pull"] for c in refs for s in c.series]
    assert np.mean(pulls) < -1  # α_eff 10 % low with the wrong g
    # off: the reference column is ignored; the references are ordinary compounds
    toml.write_text(text + '\n[analysis]\ncalibration = "off"\n')
    assert all(c.status in ("ok", "warning") for c in analyze(toml).compounds)


def test_calibration_off_without_field_factor_is_input_error(one_ref):
    toml = one_ref.path / "campaign.toml"
    toml.write_text(toml.read_text() + '\n[analysis]\ncalibration = "off"\n')
    with pytest.raises(InputError, match=r"field_factor: missing, and \[analysis\] calibration"):
        analyze(toml)
    toml.write_text(toml.read_text().replace('"off"', '"sometimes"'))
    with pytest.raises(InputError, match=r"calibration: expected one of 'auto', 'check', 'off'"):
        load_campaign(toml)


def test_field_command_reports_calibrated_g(one_ref):
    r = runner.invoke(
        app, ["field", str(one_ref.path / "campaign.toml"), "--voltage", "2 kV", "--json"]
    )
    assert r.exit_code == 0, r.output
    d = json.loads(r.stdout)
    assert d["calibration"]["quantity"] == "field_factor"
    assert math.isclose(d["field_factor_per_m3"], d["calibration"]["field_factor_per_m3"])
    assert math.isclose(d["E_dE_dx_V2_per_m3"], d["field_factor_per_m3"] * 4e6, rel_tol=1e-12)
    assert d["field_factor_err_per_m3"] > 0 and d["E_V_per_m"] is None
