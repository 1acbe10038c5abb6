"""Rigid compounds in the separation: α_eff = α + R(T, E)·μ²/(3kT) from the rotor model.

Round trips use the project's simulator, which follows the same rotor physics per voltage
(polarbeam.beam.rotors, checked against textbook formulas in tests/beam/test_beam_rotors.py).
The statistical criteria: pulls (found − true)/σ of α and μ with mean near 0 and spread near 1;
a Langevin–Debye reading of the same data misses the dipole of symmetric tops by many σ
(μ_LD ≈ √R μ, R(ρ) closed form, docs/rotors.md).
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest

from polarbeam.beam.rotors import LinearRotor, SymmetricTop
from polarbeam.constants import alpha_a3_from_si, debye_from_si
from polarbeam.pipeline.analysis import analyze
from polarbeam.separation.rotors import estimator_weights, response_ratio
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

# name, mass u, α Å³, μ D, (A, B, C) MHz, rotational temperatures (empty: the source's)
RIGID = (
    ("ST-1", 150.0, 14.0, 3.0, (4500.0, 1200.0, 1200.0), ()),  # prolate, R ≈ 0.82
    ("ST-2", 190.0, 18.0, 2.5, (1500.0, 1500.0, 750.0), ()),  # flat oblate, R ≈ π/2 − 1
    ("LR-1", 120.0, 10.0, 2.0, (None, 1800.0, None), ()),  # hot linear: R ≈ 1
    ("LR-2", 60.0, 5.0, 1.2, (None, 12000.0, None), (4.0, 8.0, 16.0)),  # cold linear
)


def _compounds():
    out = []
    for name, m, a, mu, (ca, cb, cc), rot in RIGID:
        if ca is None:
            resp, cols = LinearRotor(cb * 1e6), (("rotor", "linear"), ("rot_B_MHz", f"{cb:g}"))
        else:
            resp = SymmetricTop(ca * 1e6, cb * 1e6, cc * 1e6)
            cols = (
                ("rotor", "symmetric"),
                *tuple(
                    (f"rot_{k}_MHz", f"{v:g}") for k, v in zip("ABC", (ca, cb, cc), strict=True)
                ),
            )
        out.append(
            CompoundTruth(
                name,
                m,
                a,
                mu,
                (300.0, 450.0, 600.0),
                response=resp,
                columns=cols,
                rotational_temperatures_K=rot,
            )
        )
    return out


def _simulate(folder, seed):
    spec = InstrumentSpec.beam_profile(rel=0.003)
    spec.inputs["deflector.field_per_volt"] = (3000.0, 0.0, "m^-1")
    truth = simulate_campaign(
        folder,
        _compounds(),
        spec=spec,
        seed=seed,
        velocity_m_s=400.0,
        spread_frac=0.06,
        noise=0.01,
        max_signal=3.0,
        temperature_err_K=1.0,
        rotational_err_K=0.1,
    )
    return truth


def _strip_rotors(compounds_csv):
    with compounds_csv.open(newline="", encoding="utf-8") as h:
        rows = list(csv.reader(h))
    keep = [i for i, c in enumerate(rows[0]) if c in ("compound", "mass_u", "mass_err_u", "smiles")]
    with compounds_csv.open("w", newline="", encoding="utf-8") as h:
        csv.writer(h, lineterminator="\n").writerows([[r[i] for i in keep] for r in rows])


def test_estimator_weights_and_constant_ratio():
    v = np.linspace(-900, 900, 9)
    e = np.full(9, 1e-8)
    for offset in (True, False):
        w = estimator_weights(v, e, offset)
        assert w.sum() == pytest.approx(1.0)
    # a field-independent response (hot symmetric top, weak field) gives its R whatever the ladder
    top = SymmetricTop(4500e6, 1200e6, 1200e6)
    r = response_ratio(top, 1e-29, 300.0, 3000.0, v, e, True)
    assert r == pytest.approx(top.ratio(1e-29, 300.0, 0.0), rel=1e-9)


@pytest.mark.slow
def test_rigid_round_trip_pulls_and_langevin_debye_fails(tmp_path):
    pulls_mu, pulls_alpha, ld_mu = [], [], {}
    for seed in range(6):
        truth = _simulate(tmp_path / f"c{seed}", seed)
        camp = truth.path / "campaign.toml"
        res = {c.compound: c for c in analyze(camp).compounds}
        for name, c in res.items():
            t = truth.compounds[name]
            assert c.status != "failed", c.message
            assert c.extra["response"] in ("linear", "symmetric")
            assert all(0.5 < s.extra["ld_ratio"] <= 1.0 for s in c.series)
            pulls_mu.append(
                (debye_from_si(c.dipole.nominal_value) - t.dipole_D)
                / debye_from_si(c.dipole.std_dev)
            )
            pulls_alpha.append(
                (alpha_a3_from_si(c.alpha.nominal_value) - t.alpha_A3)
                / alpha_a3_from_si(c.alpha.std_dev)
            )
        _strip_rotors(truth.path / "compounds.csv")  # the same data read with Langevin–Debye
        for c in analyze(camp).compounds:
            t = truth.compounds[c.compound]
            assert c.extra["response"] == "ergodic"
            pull = (debye_from_si(c.dipole.nominal_value) - t.dipole_D) / debye_from_si(
                c.dipole.std_dev
            )
            ld_mu.setdefault(c.compound, []).append(pull)
    pulls_mu, pulls_alpha = np.array(pulls_mu), np.array(pulls_alpha)
    print("rotor μ pulls", np.round(pulls_mu, 2))
    print("rotor α pulls", np.round(pulls_alpha, 2))
    print("Langevin–Debye μ pulls", {k: np.round(v, 2) for k, v in ld_mu.items()})
    for p in (pulls_mu, pulls_alpha):  # 24 pulls each: mean within ~2.5σ/√24, spread near 1
        assert abs(p.mean()) < 0.55
        assert 0.6 < p.std() < 1.45
        assert np.mean(np.abs(p) < 1) > 0.45
    # the Langevin–Debye analysis misses the symmetric tops' dipoles (R = 0.82 and 0.57)
    assert np.mean(ld_mu["ST-1"]) < -2.0 and np.mean(ld_mu["ST-2"]) < -4.0
    assert np.mean(ld_mu["LR-2"]) < -1.0  # the cold linear rotor: R = 0.95–0.99


@pytest.mark.slow
def test_cold_beam_example_matches_its_readme():
    # the numbers quoted in examples/cold-beam/README.md (rotor model as given)
    camp = Path(__file__).resolve().parents[2] / "examples" / "cold-beam" / "campaign.toml"
    by = {c.compound: c for c in analyze(camp).compounds}
    quoted = {"CB-301": (1.070, 0.026, "linear"), "CB-302": (1.591, 0.040, "symmetric")}
    for name, (mu, err, kind) in quoted.items():
        c = by[name]
        assert c.extra["response"] == kind
        assert debye_from_si(c.dipole.nominal_value) == pytest.approx(mu, abs=6e-4)
        assert debye_from_si(c.dipole.std_dev) == pytest.approx(err, abs=6e-4)
    assert [round(s.extra["ld_ratio"], 3) for s in by["CB-302"].series] == [0.739, 0.773, 0.789]
    assert by["CB-303"].extra["response"] == "ergodic"
