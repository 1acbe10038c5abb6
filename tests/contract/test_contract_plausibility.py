"""Input plausibility: ranges and the likely unit slip (ranges as stated in issue 15)."""

from __future__ import annotations

from polarbeam.contract.plausibility import input_warnings, unit_slip
from polarbeam.quantities import Measured


def test_unit_slip_names_the_prefix_that_fits():
    assert unit_slip(0.266, 10e-9, 100e-6, "m", "mm") == "; a unit slip (mm for nm?)"
    assert unit_slip(266.0, 10e-9, 100e-6, "m") == "; a unit slip (m for nm?)"
    assert unit_slip(100.0, 0.0, 0.76, "m", "m") == "; a unit slip (m for mm?)"
    assert unit_slip(2.66e-3, 10e-9, 100e-6, "m", "cm") == "; off by about 1e-3: a unit slip?"
    assert unit_slip(1e40, 10e-9, 100e-6, "m", "m") == ""


def test_input_warnings_name_key_value_and_row():
    stated = {
        "instrument.grating_period": Measured(0.266),
        "instrument.grating_positions[0]": Measured(0.0),
        "instrument.grating_positions[2]": Measured(0.76),
        "deflector.length": Measured(0.1),
    }
    raw = {"instrument": {"grating_period": "(266 ± 1) mm"}}
    got = input_warnings(
        "c.toml",
        raw,
        stated,
        "talbot-lau",
        masses=[("line 2", 150.0), ("line 3", 2.5e-25)],
        rows=[("line 2", 100.0, 180.0), ("line 3", 2e6, 0.5)],
        field_per_volt=500.0,
    )
    assert got == (
        "c.toml [instrument] grating_period = 0.266 m: expected 10 nm–100 µm; "
        "a unit slip (mm for nm?)",
        "compounds.csv line 3: mass_u = 2.5e-25: expected 1–1e+08 u; a unit slip (kg for u?)",
        "shifts.csv line 3: voltage_V = 2e+06: expected |V| ≤ 1e+06 V; "
        "a unit slip (values in mV? the column is in V)",
        "shifts.csv line 3: velocity_m_s = 0.5: expected 1–1e+05 m/s; "
        "a unit slip (values in km/s? the column is in m/s)",
        "shifts.csv line 3: field = field_per_volt × |voltage_V| = 500 m⁻¹ × 2e+06 V = 1e+09 V/m: "
        "above the ≈1e+08 V/m breakdown of vacuum gaps; check the units of the voltages and of "
        "the electrode geometry",
    )


def test_plausible_inputs_give_no_warning():
    stated = {
        "instrument.grating_period": Measured(266e-9),
        "instrument.detector_position": Measured(1.45),
        "deflector.length": Measured(0.15),
    }
    got = input_warnings(
        "c.toml",
        {},
        stated,
        "beam-profile",
        masses=[("line 2", 1.008), ("line 3", 5e7)],
        rows=[("line 2", -1e4, 1.0), ("line 3", 1e6, 1e5)],
        field_per_volt=100.0,
    )
    assert got == ()
