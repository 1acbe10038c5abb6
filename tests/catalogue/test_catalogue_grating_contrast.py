"""Catalogue cases of issue 18: ``[gratings]`` in a deflection campaign (contrast per velocity).

A light grating needs each series' laser power (shifts.csv ``laser_power_W``) and the
compound's optical polarizability (compounds.csv ``alpha_opt_A3``): a missing or bad value fails
only its compound, with one line naming the file, the line or series and the column; a
``[gratings]`` table in a layout that is not Talbot–Lau stops the run with one line.
"""

from __future__ import annotations

import csv
from pathlib import Path

import pytest
from _harness import Case, run_case

from polarbeam.beam.talbot import LightGrating, MaterialGrating, TalbotLauInterferometer
from polarbeam.simulation.campaigns import (
    CompoundTruth,
    DeflectionGratings,
    InstrumentSpec,
    simulate_campaign,
)

LIGHT = TalbotLauInterferometer(
    0.38, 266e-9, MaterialGrating(0.42), LightGrating(532e-9, 900e-6), MaterialGrating(0.42)
)


def _campaign(folder: Path) -> Path:
    comps = [
        CompoundTruth(
            f"cmp-{i + 1}",
            2000.0 + 300 * i,
            120.0 + 30 * i,
            0.0,
            (300.0, 600.0),
            columns=(("alpha_opt_A3", f"{150 + 50 * i:g}"),),
        )
        for i in range(2)
    ]
    truth = simulate_campaign(
        folder / "camp",
        comps,
        spec=InstrumentSpec.talbot_lau(),
        seed=7,
        gratings=DeflectionGratings(LIGHT, 3.0),
        spread_frac=0.15,
    )
    return truth.path / "campaign.toml"


def _analyze(folder: Path, camp: Path) -> list[str]:
    return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]


def _edit_csv(name: str, fn):
    def build(folder: Path) -> list[str]:
        camp = _campaign(folder)
        p = camp.parent / name
        with p.open(newline="", encoding="utf-8") as h:
            rows = list(csv.reader(h))
        rows = fn(rows)
        with p.open("w", newline="", encoding="utf-8") as h:
            csv.writer(h, lineterminator="\n").writerows(rows)
        return _analyze(folder, camp)

    return build


def _set(column: str, compound: str, value: str, first_only: bool = False):
    def fn(rows):
        i = rows[0].index(column)
        for r in rows[1:]:
            if r[0] == compound:
                r[i] = value
                if first_only:
                    break
        return rows

    return fn


def _drop(column: str):
    def fn(rows):
        i = rows[0].index(column)
        return [r[:i] + r[i + 1 :] for r in rows]

    return fn


def _both(*fns):
    def fn(rows):
        for f in fns:
            rows = f(rows)
        return rows

    return fn


def _defaulted(folder: Path) -> None:
    """An empty alpha_opt_A3 with a structure: the stated default (the structure's additive
    static α) is used, the compound is analysed and the campaign notes say so."""
    props = _props(folder)
    assert all(p["status"] != "failed" for p in props.values()), props
    text = (folder / "out" / "results.json").read_text(encoding="utf-8")
    assert "cmp-1 has no alpha_opt_A3; the light grating's contrast uses the structure's" in text


def _props(folder: Path) -> dict[str, dict[str, str]]:
    with (folder / "out" / "properties.csv").open(newline="", encoding="utf-8") as h:
        return {r["compound"]: r for r in csv.DictReader(h)}


def _fails_first(pattern: str):
    def check(folder: Path) -> None:
        props = _props(folder)
        assert props["cmp-1"]["status"] == "failed", props["cmp-1"]
        assert pattern in props["cmp-1"]["message"], props["cmp-1"]["message"]
        assert props["cmp-2"]["status"] != "failed", props["cmp-2"]

    return check


def _noted(folder: Path) -> None:
    props = _props(folder)
    assert all(p["status"] != "failed" for p in props.values()), props
    text = (folder / "out" / "results.json").read_text(encoding="utf-8")
    assert "has no 'laser_power_W' column, so the deflection series use no model contrast" in text


CASES = [
    Case(
        "optical-alpha-missing",
        _edit_csv("compounds.csv", _set("alpha_opt_A3", "cmp-1", "")),
        1,
        None,
        _fails_first(
            "compounds.csv line 2: column 'alpha_opt_A3' expected the optical polarizability in "
            "Å³ (> 0, or a smiles for the structure's default) for the light grating's contrast "
            "per velocity, found ''"
        ),
    ),
    Case(
        "optical-alpha-default-from-structure",
        _edit_csv(
            "compounds.csv",
            _both(_set("alpha_opt_A3", "cmp-1", ""), _set("smiles", "cmp-1", "c1ccc2ccccc2c1")),
        ),
        0,
        None,
        _defaulted,
    ),
    Case(
        "optical-alpha-negative",
        _edit_csv("compounds.csv", _set("alpha_opt_A3", "cmp-1", "-5")),
        1,
        None,
        _fails_first("compounds.csv line 2: column 'alpha_opt_A3' expected the optical"),
    ),
    Case(
        "laser-power-empty",
        _edit_csv("shifts.csv", _set("laser_power_W", "cmp-1", "")),
        1,
        None,
        _fails_first(
            "shifts.csv: series cmp-1 @ 300 K: column 'laser_power_W' expected a power >= 0 W, "
            "found ''"
        ),
    ),
    Case(
        "laser-power-two-values",
        _edit_csv("shifts.csv", _set("laser_power_W", "cmp-1", "2.5", first_only=True)),
        1,
        None,
        _fails_first(
            "shifts.csv: series cmp-1 @ 300 K: column 'laser_power_W' expected one value, "
            "found 2.5 W, 3 W"
        ),
    ),
    Case(
        "laser-power-column-missing",
        _edit_csv("shifts.csv", _drop("laser_power_W")),
        0,  # the series keep no model contrast; the campaign says so in a note
        None,
        _noted,
    ),
]


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_grating_contrast_catalogue(case: Case, tmp_path: Path) -> None:
    run_case(case, tmp_path)
