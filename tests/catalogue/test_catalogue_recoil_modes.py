"""Catalogue cases of issue 20: the photon-recoil [[laser]] modes and recoil.csv columns.

A bad ``mode``, ``illumination``, ``visibility_errors``, ``hit_fraction``, ``power`` or
``beam_height_rms`` (or one used where it means nothing) stops the run with one line naming the
key; a cw row without a power, disagreeing or unlabelled shared-reference errors fail only their
compound; a negative Rician visibility ratio is dropped and reported, and a compound whose every
point was dropped fails alone.
"""

from __future__ import annotations

import csv
from pathlib import Path

import pytest
from _harness import Case, edit, run_case

from polarbeam.simulation.recoil import LaserTruth, RecoilCompoundTruth, simulate_recoil_campaign


def _recoil_campaign(folder: Path, cw: bool = False, refs: bool = False) -> Path:
    if cw:
        la = LaserTruth("green", 532e-9, 0.03, 0.0002, waist=0.9e-3, waist_err=0.02e-3, mode="cw")
    else:
        la = LaserTruth("green", 532e-9, 0.03, 0.0002, area=0.8e-6, area_err=0.04e-6)
    comps = [
        RecoilCompoundTruth("mol-one", 1450.0, {"green": 3e-16}),
        RecoilCompoundTruth("mol-two", 2100.0, {"green": 1e-16}),
    ]
    kw = {"reference_phase_err": 0.02, "reference_visibility_err": 0.02} if refs else {}
    simulate_recoil_campaign(
        folder / "camp", comps, [la], seed=5, visibility_noise_model="rician", **kw
    )
    return folder / "camp" / "campaign.toml"


def _toml(old: str, new: str, cw: bool = False):
    def build(folder: Path) -> list[str]:
        camp = _recoil_campaign(folder, cw)
        edit(camp, old, new)
        return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]

    return build


def _cells(cell, cw: bool = False, refs: bool = False):
    """The clean campaign with ``cell(row, k)`` editing the k-th row (a dict) of recoil.csv."""

    def build(folder: Path) -> list[str]:
        camp = _recoil_campaign(folder, cw, refs)
        p = camp.parent / "recoil.csv"
        with p.open(newline="", encoding="utf-8") as h:
            rows = list(csv.DictReader(h))
        fields = list(rows[0])
        for k, row in enumerate(rows):
            cell(row, k)
        with p.open("w", newline="", encoding="utf-8") as h:
            w = csv.DictWriter(h, fields, lineterminator="\n")
            w.writeheader()
            w.writerows(rows)
        return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]

    return build


def _no_outputs(folder: Path) -> None:
    assert not (folder / "out" / "recoil.csv").exists()


def _results(folder: Path) -> dict[str, list[dict[str, str]]]:
    out: dict[str, list[dict[str, str]]] = {}
    with (folder / "out" / "recoil.csv").open(newline="", encoding="utf-8") as h:
        for r in csv.DictReader(h):
            out.setdefault(r["compound"], []).append(r)
    return out


def _fails_one(pattern: str):
    def check(folder: Path) -> None:
        res = _results(folder)
        assert res["mol-one"][0]["status"] == "failed", res["mol-one"]
        assert pattern in res["mol-one"][0]["message"], res["mol-one"][0]["message"]
        assert res["mol-two"][0]["status"] != "failed", res["mol-two"]
        assert res["mol-two"][0]["cross_section_cm2"]

    return check


def _dropped(folder: Path) -> None:
    res = _results(folder)
    one = res["mol-one"][0]
    assert one["status"] == "warning" and one["n_points"] == "7", one
    assert "recoil.csv line 2: column 'visibility_ratio' expected a number >= 0" in one["message"]
    assert "found '-0.02'; point dropped" in one["message"]


def _set(column: str, value: str, compound: str = "mol-one", which=lambda k: k == 0):
    def cell(row, k):
        if row["compound"] == compound and which(k):
            row[column] = value

    return cell


WHERE = r"campaign\.toml \[\[laser\]\] 'green' "

CASES = [
    Case(
        "mode unknown",
        _toml("direction = +1", 'direction = +1\nmode = "continuous"'),
        2,
        WHERE + r"mode: expected one of 'pulsed', 'cw', found 'continuous'$",
        _no_outputs,
    ),
    Case(
        "illumination unknown",
        _toml("direction = +1", 'direction = +1\nillumination = "retro"'),
        2,
        WHERE + r"illumination: expected one of 'travelling', 'standing', found 'retro'$",
        _no_outputs,
    ),
    Case(
        "visibility_errors unknown",
        _toml("direction = +1", 'direction = +1\nvisibility_errors = "poisson"'),
        2,
        WHERE + r"visibility_errors: expected one of 'rician', 'gaussian', found 'poisson'$",
        _no_outputs,
    ),
    Case(
        "cw with a top-hat area",
        _toml("direction = +1", 'direction = +1\nmode = "cw"'),
        2,
        WHERE + r"mode: 'cw' needs waist \(the Gaussian beam the molecules cross\), found area$",
        _no_outputs,
    ),
    Case(
        "hit fraction above one",
        _toml("direction = +1", 'direction = +1\nhit_fraction = "1.2 ± 0.05"'),
        2,
        WHERE + r"hit_fraction: expected a fraction 0 < f <= 1, found '1.2 ± 0.05'$",
        _no_outputs,
    ),
    Case(
        "hit fraction with a cw beam",
        _toml('mode = "cw"', 'mode = "cw"\nhit_fraction = "0.8"', cw=True),
        2,
        WHERE + r"hit_fraction: only used with mode = 'pulsed'",
        _no_outputs,
    ),
    Case(
        "power with pulses",
        _toml("direction = +1", 'direction = +1\npower = "2 W"'),
        2,
        WHERE + r"power: only used with mode = 'cw' \(pulses give energies\)$",
        _no_outputs,
    ),
    Case(
        "power not positive",
        _toml('mode = "cw"', 'mode = "cw"\npower = "-2 W"', cw=True),
        2,
        WHERE + r"power: expected > 0, found '-2 W'$",
        _no_outputs,
    ),
    Case(
        "power in metres",
        _toml('mode = "cw"', 'mode = "cw"\npower = "2 m"', cw=True),
        2,
        WHERE + r"power: .*W",
        _no_outputs,
    ),
    Case(
        "beam height with a top-hat area",
        _toml("direction = +1", 'direction = +1\nbeam_height_rms = "0.1 mm"'),
        2,
        WHERE + r"beam_height_rms: only used with waist \(a Gaussian spot\)",
        _no_outputs,
    ),
    Case(
        "beam height negative",
        _toml('mode = "cw"', 'mode = "cw"\nbeam_height_rms = "-0.1 mm"', cw=True),
        2,
        WHERE + r"beam_height_rms: expected >= 0, found '-0.1 mm'$",
        _no_outputs,
    ),
    Case(
        "cw row without a power",
        _cells(_set("power_W", ""), cw=True),
        1,
        None,
        _fails_one(
            "recoil.csv line 2: column 'power_W' expected a number > 0 (cw laser 'green' has "
            "no power key), found ''"
        ),
    ),
    Case(
        "cw power not a number",
        _cells(_set("power_W", "bright"), cw=True),
        1,
        None,
        _fails_one("recoil.csv line 2: column 'power_W' expected a number > 0, found 'bright'"),
    ),
    Case(
        "shared reference errors disagree",
        _cells(_set("reference_phase_err_rad", "0.05", which=lambda k: k == 3), refs=True),
        1,
        None,
        _fails_one(
            "recoil.csv line 5: reference 'ref-mol-one-green-500' expected the errors of line 2 "
            "(reference_phase_err_rad 0.02, reference_visibility_err 0.02), found 0.05, 0.02"
        ),
    ),
    Case(
        "reference errors without a label",
        _cells(_set("reference", ""), refs=True),
        1,
        None,
        _fails_one(
            "recoil.csv line 2: column 'reference' expected the label of the shared laser-off "
            "reference whose errors this row gives, found ''"
        ),
    ),
    Case(
        "reference error negative",
        _cells(_set("reference_visibility_err", "-0.01"), refs=True),
        1,
        None,
        _fails_one(
            "recoil.csv line 2: column 'reference_visibility_err' expected a number >= 0, "
            "found '-0.01'"
        ),
    ),
    Case(
        "negative Rician ratio dropped",
        _cells(_set("visibility_ratio", "-0.02")),
        0,
        None,
        _dropped,
    ),
    Case(
        "every point of a compound dropped",
        _cells(_set("visibility_ratio", "-0.02", which=lambda k: True)),
        1,
        None,
        _fails_one("recoil.csv: compound 'mol-one': every point was dropped (recoil.csv line 2"),
    ),
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_catalogue_recoil_modes(case, tmp_path):
    run_case(case, tmp_path)


def test_cw_in_the_time_domain_is_refused(tmp_path):
    la = LaserTruth("green", 532e-9, 12.5e-6, area=0.8e-6)
    comp = RecoilCompoundTruth("mol-one", 1450.0, {"green": 3e-16})
    simulate_recoil_campaign(tmp_path / "td", [comp], [la], layout="time-domain", seed=1)
    camp = tmp_path / "td" / "campaign.toml"
    edit(camp, 'area = "0.8 mm^2"', 'waist = "0.9 mm"\nmode = "cw"')
    case = Case(
        "cw in the time domain",
        lambda folder: ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"],
        2,
        WHERE + r"mode: expected 'pulsed' in the time-domain layout \(a kick needs a time\), "
        r"found 'cw'$",
        _no_outputs,
    )
    run_case(case, tmp_path)
