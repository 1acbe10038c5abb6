"""Catalogue: a bad cell in a raw-scan table fails only its compound; skipped comment lines are
reported; names in phases.csv get the spreadsheet guard."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np
import pytest
from _harness import Case, run_case

from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_scan_campaign


def _scan_campaign(folder: Path) -> Path:
    comps = [
        CompoundTruth(f"sc-{i + 1}", 150.0 + 30 * i, 15.0 + 4 * i, 0.5 * i, (300.0, 500.0))
        for i in range(2)
    ]
    truth = simulate_scan_campaign(
        folder / "camp", comps, spec=InstrumentSpec.talbot_lau(), seed=np.random.default_rng(4)
    )
    return truth.path / "campaign.toml"


def _rewrite(path: Path, change) -> None:
    rows = list(csv.reader(path.open(newline="", encoding="utf-8")))
    change(rows)
    with path.open("w", newline="", encoding="utf-8") as fh:
        csv.writer(fh).writerows(rows)


def _bad_count_cell(folder: Path) -> list[str]:
    camp = _scan_campaign(folder)
    scans = camp.parent / "scans.csv"

    def change(rows):
        col = rows[0].index("counts")
        row = next(r for r in rows[1:] if r[0] == "sc-2")
        row[col] = "many"

    _rewrite(scans, change)
    return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]


def _only_sc2_failed(folder: Path) -> None:
    result = json.loads((folder / "out" / "results.json").read_text(encoding="utf-8"))
    status = {c["compound"]: c for c in result["compounds"]}
    assert status["sc-1"]["status"] in ("ok", "warning")
    assert status["sc-2"]["status"] == "failed"
    assert "counts" in status["sc-2"]["message"] and "'many'" in status["sc-2"]["message"]


def _comment_lines(folder: Path) -> list[str]:
    camp = _scan_campaign(folder)
    compounds = camp.parent / "compounds.csv"
    text = compounds.read_text(encoding="utf-8")
    compounds.write_text("# prepared for the catalogue\n# second note\n" + text, encoding="utf-8")
    return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]


def _comment_note(folder: Path) -> None:
    notes = json.loads((folder / "out" / "results.json").read_text(encoding="utf-8"))["notes"]
    assert any("skipped 2 comment line(s) above the header" in n for n in notes), notes


def _formula_name(folder: Path) -> list[str]:
    camp = _scan_campaign(folder)
    for name in ("scans.csv", "compounds.csv"):
        p = camp.parent / name
        p.write_text(p.read_text(encoding="utf-8").replace("sc-1", "=sc-1"), encoding="utf-8")
    return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]


def _phases_guarded(folder: Path) -> None:
    rows = list(csv.DictReader((folder / "out" / "phases.csv").open(encoding="utf-8")))
    assert {r["compound"] for r in rows} >= {"'=sc-1", "sc-2"}
    result = json.loads((folder / "out" / "results.json").read_text(encoding="utf-8"))
    assert "=sc-1" in {c["compound"] for c in result["compounds"]}  # exact in the JSON


CASES = [
    Case("bad counts cell fails only its compound", _bad_count_cell, 1, None, _only_sc2_failed),
    Case("comment lines above a header are reported", _comment_lines, 0, None, _comment_note),
    Case("formula-like name guarded in phases.csv", _formula_name, 0, None, _phases_guarded),
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_catalogue_scans_cells(case, tmp_path):
    run_case(case, tmp_path)
