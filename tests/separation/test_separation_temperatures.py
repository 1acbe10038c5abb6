"""Which temperature the separation uses (issue 16): rotational temperatures and a thermometer
offset common to every series.

Round trips use the project's simulator (known truth). The physics: the orientational term of
α_eff is ⟨μ²⟩/(3kT) with T the rotational temperature of the molecules (Langevin–Debye; any
textbook on dielectrics, e.g. Böttcher, Theory of Electric Polarization, from memory); a common
thermometer offset δ shifts every 1/T_i by −δ/T_i² (first-order Taylor expansion of 1/(T + δ)).
"""

from __future__ import annotations

import csv
import math

import numpy as np
from uncertainties import ufloat

from polarbeam.constants import alpha_si_from_a3, debye_from_si
from polarbeam.pipeline.analysis import analyze
from polarbeam.separation.debye import debye_fit
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

NOZZLE = (300.0, 375.0, 450.0)
ROTATION = (20.0, 35.0, 55.0)
TRUE_MU = {"RT-1": 1.2, "RT-2": 0.6}


def _simulate(folder, seed=5):
    comps = [
        CompoundTruth(
            n, 180.0 + 40 * i, 20.0 + 6 * i, mu, NOZZLE, rotational_temperatures_K=ROTATION
        )
        for i, (n, mu) in enumerate(TRUE_MU.items())
    ]
    truth = simulate_campaign(
        folder,
        comps,
        spec=InstrumentSpec.talbot_lau(rel=0.004),
        seed=seed,
        velocity_m_s=520.0,
        spread_frac=0.06,
        noise=0.02,
        max_signal=2.5,
        temperature_err_K=2.0,
        rotational_err_K=1.0,
    )
    return truth.path / "campaign.toml"


def _drop_rotational(shifts):
    with shifts.open(newline="", encoding="utf-8") as h:
        rows = list(csv.reader(h))
    keep = [i for i, c in enumerate(rows[0]) if not c.startswith("rotational_")]
    with shifts.open("w", newline="", encoding="utf-8") as h:
        csv.writer(h, lineterminator="\n").writerows([[r[i] for i in keep] for r in rows])


def test_rotational_round_trip_and_nozzle_temperature_far_off(tmp_path):
    camp = _simulate(tmp_path / "rot")
    res = analyze(camp)
    by = {c.compound: c for c in res.compounds}
    for name, mu in TRUE_MU.items():
        c = by[name]
        assert c.status != "failed", c.message
        lo, hi = (debye_from_si(x) for x in c.dipole_interval_si)
        err = debye_from_si(c.dipole.std_dev)
        print(
            f"{name}: true {mu} D, found {debye_from_si(c.dipole.nominal_value):.3f} D "
            f"[{lo:.3f}, {hi:.3f}]"
        )
        # within its 68.3 % interval widened to 3σ (one draw: 3σ keeps the test deterministic-safe)
        assert lo - 2 * err <= mu <= hi + 2 * err
        assert c.series[0].extra["rotational_temperature_K"] == ROTATION[0]
    row = res.series.iloc[0]
    assert row["temperature_K"] == NOZZLE[0] and row["rotational_temperature_K"] == ROTATION[0]

    _drop_rotational(camp.parent / "shifts.csv")  # the same data read with the nozzle temperature
    wrong = {c.compound: c for c in analyze(camp).compounds}
    for name, mu in TRUE_MU.items():
        found = debye_from_si(wrong[name].dipole.nominal_value)
        print(f"{name} with the nozzle temperature: {found:.3f} D (true {mu} D)")
        assert found > 3 * mu  # visibly wrong: T_rot/T_nozzle ≈ 1/10 puts √10 ≈ 3.2 into μ
    assert "rotational_temperature_K" not in analyze(camp).series.columns


def test_common_offset_shifts_alpha_by_the_analytic_amount():
    """δ common to every T_i: α gains β·Σ a_i/T_i² · σ_δ (a_i the intercept weights), its
    nominal value and the fit weights stay the same."""
    temps = np.array([300.0, 400.0, 500.0, 650.0])
    alpha, beta = 20.0, 4000.0  # Å³ and Å³·K: noise-free line (the derivative is then exact)
    sig = np.array([0.3, 0.25, 0.35, 0.3])
    a_eff = [
        ufloat(alpha_si_from_a3(alpha + beta / t), alpha_si_from_a3(s), tag=f"fit {t}")
        for t, s in zip(temps, sig, strict=True)
    ]
    t_own = [ufloat(t, 1.0, tag=f"temperature {t}") for t in temps]
    delta = ufloat(0.0, 2.0, tag="source: thermometer offset")
    free = debye_fit(a_eff, t_own)
    shared = debye_fit(a_eff, [t + delta for t in t_own])
    assert np.allclose(free.weights, shared.weights, rtol=0, atol=0)  # the offset does not weight
    assert math.isclose(free.alpha.nominal_value, shared.alpha.nominal_value, rel_tol=1e-12)
    x, w = 1.0 / temps, free.weights
    s1, s2 = float(np.sum(w * x)), float(np.sum(w * x * x))
    det = float(np.sum(w)) * s2 - s1 * s1
    a = w * (s2 - s1 * x) / det  # intercept weights: Σa = 1, Σa·x = 0
    expected = alpha_si_from_a3(beta * float(np.sum(a / temps**2)) * 2.0)
    comp = shared.alpha.error_components()[delta]
    assert math.isclose(abs(comp), abs(expected), rel_tol=1e-6), (comp, expected)
    widened = math.hypot(free.alpha.std_dev, expected)
    assert math.isclose(shared.alpha.std_dev, widened, rel_tol=1e-9)
    print(
        f"α error {free.alpha.std_dev / alpha_si_from_a3(1):.4f} → "
        f"{shared.alpha.std_dev / alpha_si_from_a3(1):.4f} Å³ with a 2 K common offset"
    )


def test_thermometer_offset_in_the_campaign_budget(tmp_path):
    camp = _simulate(tmp_path / "off")
    _drop_rotational(camp.parent / "shifts.csv")  # the offset applies to source temperatures
    before = {c.compound: c for c in analyze(camp).compounds}
    camp.write_text(
        camp.read_text(encoding="utf-8") + '\n[source]\nthermometer_offset = "0 ± 2 K"\n'
    )
    res = analyze(camp)
    assert res.stated_inputs["source.thermometer_offset"]["error"] == 2.0
    for c in res.compounds:
        b = before[c.compound]
        comps = {v.tag: d for v, d in c.alpha.error_components().items()}
        part = comps["source: thermometer offset"]
        assert math.isclose(c.alpha.nominal_value, b.alpha.nominal_value, rel_tol=1e-12)
        assert math.isclose(c.alpha.std_dev, math.hypot(b.alpha.std_dev, part), rel_tol=1e-9)
