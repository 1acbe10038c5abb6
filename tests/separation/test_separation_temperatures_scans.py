"""Rotational temperatures through raw fringe scans (issue 16): the scan table's optional
``rotational_temperature_K``/``_err_K`` columns reach the separation, with the checks of
shifts.csv.

Round trips use the project's simulator (known truth). The physics: the orientational term of
α_eff is ⟨μ²⟩/(3kT) with T the rotational temperature of the molecules (Langevin–Debye; any
textbook on dielectrics, e.g. Böttcher, Theory of Electric Polarization, from memory).
"""

from __future__ import annotations

import pandas as pd
import pytest

from polarbeam.constants import debye_from_si
from polarbeam.contract.scans import reduce_scans_file, series_from_reduction
from polarbeam.pipeline.analysis import analyze
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_scan_campaign

NOZZLE = (300.0, 375.0, 450.0)
ROTATION = (20.0, 35.0, 55.0)
TRUE_MU = {"RS-1": 1.2, "RS-2": 0.6}


def _simulate(folder, seed=7, parquet=False):
    comps = [
        CompoundTruth(
            n, 180.0 + 40 * i, 20.0 + 6 * i, mu, NOZZLE, rotational_temperatures_K=ROTATION
        )
        for i, (n, mu) in enumerate(TRUE_MU.items())
    ]
    truth = simulate_scan_campaign(
        folder,
        comps,
        spec=InstrumentSpec.talbot_lau(rel=0.004),
        seed=seed,
        velocity_m_s=520.0,
        spread_frac=0.06,
        max_signal=2.5,
        temperature_err_K=2.0,
        rotational_err_K=1.0,
        parquet=parquet,
    )
    return truth.path / "campaign.toml"


@pytest.mark.parametrize("parquet", [False, True])
def test_rotational_scans_round_trip(tmp_path, parquet):
    camp = _simulate(tmp_path / "rot", parquet=parquet)
    res = analyze(camp)
    by = {c.compound: c for c in res.compounds}
    for name, mu in TRUE_MU.items():
        c = by[name]
        assert c.status != "failed", c.message
        lo, hi = (debye_from_si(x) for x in c.dipole_interval_si)
        err = debye_from_si(c.dipole.std_dev)
        print(
            f"{name} ({'parquet' if parquet else 'csv'}): true {mu} D, found "
            f"{debye_from_si(c.dipole.nominal_value):.3f} D [{lo:.3f}, {hi:.3f}]"
        )
        # within its 68.3 % interval widened by 2σ (one draw)
        assert lo - 2 * err <= mu <= hi + 2 * err
        assert c.series[0].extra["rotational_temperature_K"] == ROTATION[0]
        assert c.series[0].extra["rotational_temperature_err_K"] == 1.0
    row = res.series.iloc[0]
    assert row["temperature_K"] == NOZZLE[0] and row["rotational_temperature_K"] == ROTATION[0]


def test_scans_without_rotational_columns_read_none(tmp_path):
    folder = tmp_path / "plain"
    comp = CompoundTruth("PL-1", 200.0, 20.0, 1.0, NOZZLE)
    spec = InstrumentSpec.talbot_lau()
    simulate_scan_campaign(folder, [comp], spec=spec, seed=3)
    assert "rotational_temperature_K" not in pd.read_csv(folder / "scans.csv").columns
    period = spec.inputs["instrument.grating_period"][0]
    red, problems = reduce_scans_file(folder / "scans.csv", period)
    assert not problems
    assert "rotational_temperature_K" not in red.table.columns
    series, problems, _ = series_from_reduction(red)
    assert not problems and all(s.rotational is None for s in series["PL-1"])


def _edit_scans(camp, edit):
    path = camp.parent / "scans.csv"
    df = pd.read_csv(path)
    edit(df)
    path.write_text(df.to_csv(index=False, float_format="%.10g", lineterminator="\n"))
    return df


def test_bad_rotational_value_fails_only_its_compound(tmp_path):
    camp = _simulate(tmp_path / "bad")

    def edit(df):
        df.loc[df["compound"] == "RS-1", "rotational_temperature_K"] = -20.0

    _edit_scans(camp, edit)
    by = {c.compound: c for c in analyze(camp).compounds}
    assert by["RS-1"].status == "failed"
    assert (
        "column 'rotational_temperature_K' expected a number > 0, found '-20'" in by["RS-1"].message
    )
    assert by["RS-1"].message.startswith("scans.csv scan ")
    assert by["RS-2"].status != "failed", by["RS-2"].message


def test_rotational_differs_within_a_series_fails_only_its_compound(tmp_path):
    camp = _simulate(tmp_path / "differs")
    scans_of_rs1 = []

    def edit(df):
        sel = (df["compound"] == "RS-1") & (df["temperature_K"] == NOZZLE[0])
        signal = df.loc[sel & (df["voltage_V"] != 0), "scan"].unique()
        scans_of_rs1.extend(int(s) for s in signal)
        df.loc[df["scan"] == signal[3], "rotational_temperature_K"] = 31.0

    _edit_scans(camp, edit)
    by = {c.compound: c for c in analyze(camp).compounds}
    msg = by["RS-1"].message
    assert by["RS-1"].status == "failed"
    assert msg.startswith(f"scans.csv scan {scans_of_rs1[3]}: column 'rotational_temperature_K' ")
    assert "expected the same value for every row of series RS-1 @ 300 K" in msg
    assert by["RS-2"].status != "failed", by["RS-2"].message


def test_non_number_rotational_cell_fails_only_its_compound(tmp_path):
    camp = _simulate(tmp_path / "text")

    def edit(df):
        df["rotational_temperature_K"] = df["rotational_temperature_K"].astype(object)
        df.loc[df["compound"] == "RS-2", "rotational_temperature_K"] = "cold"

    _edit_scans(camp, edit)
    by = {c.compound: c for c in analyze(camp).compounds}
    assert by["RS-2"].status == "failed"
    assert "column 'rotational_temperature_K': expected a number, found 'cold'" in (
        by["RS-2"].message
    )
    assert by["RS-1"].status != "failed", by["RS-1"].message
