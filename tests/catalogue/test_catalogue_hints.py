"""Catalogue: input errors that say what to do (misspelt keys and columns, a key in the wrong
table, unit-prefixed columns, semicolon-separated exports)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
from _harness import Case, edit, run_case, small_campaign

from polarbeam.simulation.scans import simulate_scan_table


def _analyze(folder: Path, camp: Path) -> list[str]:
    return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]


def _no_outputs(folder: Path) -> None:
    assert not (folder / "out" / "properties.csv").exists()


def _toml(old: str, new: str):
    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        edit(camp, old, new)
        return _analyze(folder, camp)

    return build


def _shifts_header(old: str, new: str):
    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        edit(camp.parent / "shifts.csv", old, new)
        return _analyze(folder, camp)

    return build


def _semicolons(folder: Path) -> list[str]:
    camp = small_campaign(folder)
    p = camp.parent / "shifts.csv"
    p.write_text(p.read_text(encoding="utf-8").replace(",", ";"), encoding="utf-8")
    return _analyze(folder, camp)


def _scans(header_edit):
    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        sim = simulate_scan_table(
            [
                dict(
                    shifts_rad=[0.1, 0.4],
                    voltages_V=[1000.0, 2000.0],
                    compound="cmp-1",
                    temperature_K=300.0,
                )
            ],
            rng=np.random.default_rng(3),
            bins=12,
        )
        text = header_edit(sim.table.to_csv(index=False))
        (camp.parent / "scans.csv").write_text(text, encoding="utf-8")
        edit(camp, 'shifts = "shifts.csv"', 'scans = "scans.csv"')
        return _analyze(folder, camp)

    return build


CASES = [
    Case(
        "misspelt-key",
        _toml("entrance =", "entrence ="),
        2,
        r"unknown key\(s\) in \[deflector\]: 'entrence'.*\(did you mean 'entrance'\?\)$",
        _no_outputs,
    ),
    Case(
        "key-in-the-wrong-table",
        _toml("length =", "grating_period ="),
        2,
        r"'grating_period' belongs in \[instrument\]\)$",
        _no_outputs,
    ),
    Case(
        "unit-prefixed-column",
        _shifts_header("voltage_V", "voltage_kV"),
        2,
        r"shifts\.csv: missing column\(s\) voltage_V.*columns are in SI: use voltage_V, not "
        r"voltage_kV\)$",
        _no_outputs,
    ),
    Case(
        "misspelt-column",
        _shifts_header("phase_rad,", "phse_rad,"),
        2,
        r"found phse_rad: did you mean phase_rad\?\)$",
        _no_outputs,
    ),
    Case(
        "semicolon-export",
        _semicolons,
        2,
        r"shifts\.csv: the header is semicolon-separated; expected a comma-separated CSV file",
        _no_outputs,
    ),
    Case(
        "scans-unit-prefixed-column",
        _scans(lambda t: t.replace("voltage_V", "voltage_kV", 1)),
        2,
        r"scans\.csv: missing column\(s\) voltage_V .*; columns are in SI: use voltage_V, not "
        r"voltage_kV$",
        _no_outputs,
    ),
    Case(
        "scans-semicolon-export",
        _scans(lambda t: t.replace(",", ";")),
        2,
        r"scans\.csv: the header is semicolon-separated",
        _no_outputs,
    ),
]


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_hint_cases(case, tmp_path):
    run_case(case, tmp_path)
