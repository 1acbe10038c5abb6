"""Catalogue cases of issue 18: the [gratings] table and visibilities.csv.

A bad ``[gratings]`` key stops the run with one line naming it; a bad row of
``visibilities.csv`` (negative power, visibility outside 0 … 1) fails only its compound, named
in one ``failed (visibility)`` line, and the other compound is fitted.
"""

from __future__ import annotations

import csv
import json
import re
from pathlib import Path

import numpy as np
import pytest
from _harness import Case, edit, run_case

from polarbeam.simulation.visibility import (
    VisibilityCompoundTruth,
    VisibilitySetup,
    simulate_visibility_campaign,
)

SETUP = VisibilitySetup(powers=tuple(np.linspace(1.0, 9.0, 7)))
COMPOUNDS = [
    VisibilityCompoundTruth("vis-1", 1500.0, 110.0, 4.0, ((500.0, 170.0, 20.0, 1.5),)),
    VisibilityCompoundTruth("vis-2", 2200.0, 140.0, 6.0, ((500.0, 150.0, 18.0, 1.5),)),
]


def _campaign(folder: Path) -> Path:
    return simulate_visibility_campaign(folder / "camp", COMPOUNDS, SETUP, seed=5)[0]


def _analyze(folder: Path, camp: Path) -> list[str]:
    return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]


def _toml(old: str, new: str):
    def build(folder: Path) -> list[str]:
        camp = _campaign(folder)
        edit(camp, old, new)
        return _analyze(folder, camp)

    return build


def _row(compound: str, column: str, value: str):
    def build(folder: Path) -> list[str]:
        camp = _campaign(folder)
        p = camp.parent / "visibilities.csv"
        with p.open(newline="", encoding="utf-8") as h:
            rows = list(csv.DictReader(h))
        for r in rows:
            if r["compound"] == compound:
                r[column] = value
                break
        with p.open("w", newline="", encoding="utf-8") as h:
            w = csv.DictWriter(h, fieldnames=list(rows[0]), lineterminator="\n")
            w.writeheader()
            w.writerows(rows)
        return _analyze(folder, camp)

    return build


def _tables(change):
    """The campaign with measured velocity tables (velocities.csv; empty velocity cells in
    visibilities.csv); ``change(rows)`` edits the table rows (compound, T, velocity, weight)."""

    def build(folder: Path) -> list[str]:
        camp = simulate_visibility_campaign(
            folder / "camp", COMPOUNDS, SETUP, seed=5, table_shape="supersonic"
        )[0]
        p = camp.parent / "velocities.csv"
        with p.open(newline="", encoding="utf-8") as h:
            rows = list(csv.reader(h))
        rows = [rows[0], *change(rows[1:])]
        with p.open("w", newline="", encoding="utf-8") as h:
            csv.writer(h, lineterminator="\n").writerows(rows)
        return _analyze(folder, camp)

    return build


def _nothing_written(folder: Path) -> None:
    assert not (folder / "out" / "optical.csv").exists()


def _first_failed(pattern: str):
    def check(folder: Path) -> None:
        with (folder / "out" / "optical.csv").open(newline="", encoding="utf-8") as h:
            rows = {r["compound"]: r for r in csv.DictReader(h)}
        assert rows["vis-1"]["alpha_opt_A3"] == "", rows["vis-1"]
        assert float(rows["vis-2"]["alpha_opt_A3"]) > 0
        record = json.loads((folder / "out" / "results.json").read_text(encoding="utf-8"))
        status = {c["compound"]: c for c in record["optical"]["compounds"]}
        assert status["vis-1"]["status"] == "failed"
        assert re.search(pattern, status["vis-1"]["message"]), status["vis-1"]["message"]
        assert status["vis-2"]["status"] == "ok"

    return check


CASES = [
    Case(
        "light-grating-period",
        _toml('laser_wavelength = "532 nm"', 'laser_wavelength = "500 nm"'),
        2,
        r"campaign\.toml \[gratings\] laser_wavelength: the light grating's period "
        r"laser_wavelength/2 = 250 nm must equal \[instrument\] grating_period, found 266 nm$",
        _nothing_written,
    ),
    Case(
        "open-fraction-above-one",
        _toml('open_fraction = "0.42 ± 0.02"', 'open_fraction = "1.2 ± 0.02"'),
        2,
        r"campaign\.toml \[gratings\] open_fraction: expected a number between 0 and 1 "
        r"\(exclusive\), found '1\.2 ± 0\.02'$",
        _nothing_written,
    ),
    Case(
        "open-fraction-zero",
        _toml('open_fraction = "0.42 ± 0.02"', 'open_fraction = "0"'),
        2,
        r"\[gratings\] open_fraction: expected a number between 0 and 1 \(exclusive\), found '0'",
        _nothing_written,
    ),
    Case(
        "absorbed-molecules-choice",
        _toml('absorbed_molecules = "kept"', 'absorbed_molecules = "gone"'),
        2,
        r"\[gratings\] absorbed_molecules: expected 'kept' or 'lost', found 'gone'$",
        _nothing_written,
    ),
    Case(
        "light-first-grating",
        _toml('first = "material"', 'first = "light"'),
        2,
        r"\[gratings\] first: expected 'material' \(only the second grating may be a standing "
        r"light wave\), found 'light'$",
        _nothing_written,
    ),
    Case(
        "gratings-unknown-key",
        _toml("[gratings]", '[gratings]\nslit_width = "100 nm"'),
        2,
        r"unknown key\(s\) in \[gratings\]: 'slit_width'",
        _nothing_written,
    ),
    Case(
        "negative-power",
        _row("vis-1", "laser_power_W", "-2"),
        1,
        None,
        _first_failed(
            r"visibilities\.csv line 2: column 'laser_power_W' expected >= 0, found '-2'"
        ),
    ),
    Case(
        "negative-visibility",
        _row("vis-1", "visibility", "-0.01"),
        1,
        None,
        _first_failed(
            r"visibilities\.csv line 2: column 'visibility' expected 0 \.\. 1, found '-0\.01'"
        ),
    ),
    Case(
        "visibility-above-one",
        _row("vis-1", "visibility", "1.3"),
        1,
        None,
        _first_failed(
            r"visibilities\.csv line 2: column 'visibility' expected 0 \.\. 1, found '1\.3'"
        ),
    ),
    Case(
        "velocity-table-without-series",
        _tables(lambda rows: [*rows, ["vis-1", "700", "150", "1"], ["vis-1", "700", "160", "1"]]),
        1,
        None,
        _first_failed(
            r"velocities\.csv: series vis-1 @ 700 K has a table but no series in "
            r"visibilities\.csv; expected a series of vis-1 at temperature_K 700, found 500 K$"
        ),
    ),
    Case(
        "velocity-cells-empty-without-table",
        _tables(lambda rows: [r for r in rows if r[0] != "vis-1"]),
        1,
        None,
        _first_failed(
            r"visibilities\.csv: series vis-1 @ 500 K expected velocity_m_s and "
            r"velocity_spread_m_s \(or its rows in velocities\.csv\), found empty cells and no "
            r"table$"
        ),
    ),
    Case(
        "velocity-table-negative-weight",
        _tables(lambda rows: [[*r[:3], "-1"] if i == 5 else r for i, r in enumerate(rows)]),
        1,
        None,
        _first_failed(
            r"velocities\.csv: series vis-1 @ 500 K: the table is not a velocity distribution: "
            r"expected weights >= 0, found -1$"
        ),
    ),
    Case(
        "visibility-error-zero",
        _row("vis-1", "visibility_err", "0"),
        1,
        None,
        _first_failed(r"column 'visibility_err' expected a number > 0, found '0'"),
    ),
]


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_visibility_catalogue(case: Case, tmp_path: Path) -> None:
    result = run_case(case, tmp_path)
    if case.exit_code == 1:  # the failed compound is named on stderr in one line
        stderr = result.stderr if hasattr(result, "stderr") else result.output
        lines = [ln for ln in stderr.splitlines() if ln.startswith("failed (visibility)")]
        assert len(lines) == 1 and "vis-1" in lines[0], stderr
