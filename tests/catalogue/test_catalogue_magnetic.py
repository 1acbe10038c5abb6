"""Catalogue cases of issue 24: magnetic deflectors (``[deflector] field = "magnetic"``).

An electric key in a magnetic deflector (or a magnetic key in an electric one), a ``voltage_V``
column in a magnetic campaign, a wrong field factor unit and a negative current give one line
naming the key or column; a clean magnetic campaign writes the magnetic columns.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
from _harness import Case, edit, run_case, small_campaign

from polarbeam.simulation.magnetic import MagneticTruth, magnet_spec, simulate_magnetic_campaign


def magnetic_campaign(folder: Path, seed: int = 5) -> Path:
    """A clean diamagnet + radical Talbot–Lau campaign in an electromagnet."""
    comps = [
        MagneticTruth("dia-1", 180.0, -90e-6, (300.0, 450.0, 600.0)),
        MagneticTruth("rad-1", 220.0, -110e-6, (300.0, 450.0, 600.0), spin=0.5),
    ]
    truth = simulate_magnetic_campaign(
        folder / "mag", comps, spec=magnet_spec(field_per_ampere=0.06), seed=seed
    )
    return truth.path / "campaign.toml"


def _analyse(toml: Path, folder: Path) -> list[str]:
    return ["analyze", str(toml), "--out", str(folder / "out")]


def _edited(old: str, new: str, file: str = "campaign.toml"):
    def build(folder: Path) -> list[str]:
        toml = magnetic_campaign(folder)
        edit(toml.parent / file, old, new)
        return _analyse(toml, folder)

    return build


def _electric_with_magnetic_key(folder: Path) -> list[str]:
    toml = small_campaign(folder)
    edit(toml, "[deflector]\n", '[deflector]\nfield_per_ampere = "0.06 T/A"\n')
    return _analyse(toml, folder)


def _negative_current(folder: Path) -> list[str]:
    toml = magnetic_campaign(folder)
    path = toml.parent / "shifts.csv"
    rows = list(csv.reader(path.read_text(encoding="utf-8").splitlines()))
    k = rows[0].index("current_A")
    for r in rows[1:]:
        if r[0] == "rad-1" and float(r[k]) > 0:
            r[k] = "-" + r[k]
            break
    path.write_text("\n".join(",".join(r) for r in rows) + "\n", encoding="utf-8")
    return _analyse(toml, folder)


def _outputs(folder: Path) -> None:
    out = folder / "out"
    head = (out / "series.csv").read_text(encoding="utf-8").splitlines()[0]
    assert head.startswith(
        "compound,temperature_K,n_points,chi_eff_cm3_mol,chi_eff_err_cm3_mol,reduced_chi2"
    )
    assert "alpha_eff_A3" not in head
    head = (out / "properties.csv").read_text(encoding="utf-8").splitlines()[0]
    assert head.startswith(
        "compound,chi_dia_cm3_mol,chi_dia_err_cm3_mol,moment_muB,moment_err_muB,"
        "moment_upper_muB,moment_lo_muB,moment_hi_muB,status,message"
    )


def _only_dia_left(folder: Path) -> None:
    rows = list(csv.DictReader((folder / "out" / "properties.csv").open(encoding="utf-8")))
    by = {r["compound"]: r for r in rows}
    assert by["rad-1"]["status"] == "failed"
    assert by["dia-1"]["status"] in ("ok", "warning") and by["dia-1"]["chi_dia_cm3_mol"]


CASES = [
    Case("magnetic-clean", lambda f: _analyse(magnetic_campaign(f), f), 0, None, _outputs),
    Case(
        "magnetic-electric-key",
        _edited("[deflector]\n", '[deflector]\nfield_per_volt = "500 m^-1"\n'),
        2,
        r"campaign\.toml \[deflector\] field_per_volt: an electric key in a magnetic deflector",
    ),
    Case(
        "electric-magnetic-key",
        _electric_with_magnetic_key,
        2,
        r"campaign\.toml \[deflector\] field_per_ampere: a magnetic key in an electric deflector",
    ),
    Case(
        "magnetic-voltage-column",
        _edited("current_A", "voltage_V", "shifts.csv"),
        2,
        r"shifts\.csv: column 'voltage_V' in a magnetic campaign .*expected 'current_A'",
    ),
    Case(
        "magnetic-field-factor-unit",
        _edited("T^2/(m A^2)", "m^-3"),
        2,
        r"\[deflector\] field_factor: expected a unit of T\^2/\(m A\^2\)",
    ),
    Case(
        "magnetic-field-value",
        _edited('field = "magnetic"', 'field = "gravity"'),
        2,
        r"\[deflector\] field: expected one of electric, magnetic, found 'gravity'",
    ),
    Case("magnetic-negative-current", _negative_current, 1, None, _only_dia_left),
]


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_catalogue_magnetic(case, tmp_path):
    run_case(case, tmp_path)


def test_negative_current_message_names_the_column(tmp_path):
    from polarbeam.contract.campaign import load_campaign

    toml = tmp_path / "x"
    _negative_current(toml)
    camp = load_campaign(tmp_path / "x" / "mag" / "campaign.toml")
    bad = {c.name: c.problem for c in camp.compounds}
    assert bad["dia-1"] is None
    assert "column 'current_A' expected a number >= 0, found '-" in bad["rad-1"]
    assert np.isfinite(camp.stated["deflector.field_factor"].value)
