"""Catalogue cases of issue 21: structure estimates and the conformer quantum-chemistry dipoles.

``estimate`` with atoms, molecules and a bad row (the bad row fails alone, the others carry the
new uncertainty and method columns); ``compute --conformers`` with a negative count or a bad
temperature stops with one line before any calculation (no PySCF needed).
"""

from __future__ import annotations

import csv
from pathlib import Path

import pytest
from _harness import Case, run_case

from polarbeam._util.optional import has


def _library(text: str):
    def build(folder: Path) -> list[str]:
        (folder / "lib.csv").write_text(text, encoding="utf-8")
        return ["estimate", str(folder / "lib.csv"), "--out", str(folder / "est.csv")]

    return build


def _rows(folder: Path) -> dict[str, dict[str, str]]:
    with (folder / "est.csv").open(encoding="utf-8") as fh:
        return {r["compound"]: r for r in csv.DictReader(fh)}


def _atoms_and_bad_row(folder: Path) -> None:
    rows = _rows(folder)
    assert rows["argon"]["alpha_method"] == "atom-table" and rows["argon"]["status"] == "ok"
    assert rows["ethanol"]["alpha_method"] == "additive:llmr"
    assert float(rows["ethanol"]["alpha_additive_err_A3"]) > 0
    assert rows["broken"]["status"] == "failed"
    assert "RDKit cannot parse SMILES 'C1CC'" in rows["broken"]["message"]


def _no_output(folder: Path) -> None:
    assert not (folder / "computed.csv").exists()


def _compute(*extra: str):
    def build(folder: Path) -> list[str]:
        return ["compute", "CCO", "--out", str(folder / "computed.csv"), *extra]

    return build


CASES = [
    Case(
        "estimate: an atom, a molecule and a bad SMILES",
        _library("compound,smiles\nargon,[Ar]\nethanol,CCO\nbroken,C1CC\n"),
        1,
        None,
        _atoms_and_bad_row,
        tags=("needs-mendeleev",),
    ),
    Case(
        "compute --conformers below zero",
        _compute("--conformers", "-3"),
        2,
        r"^error: --conformers: expected an integer >= 0, found -3$",
        _no_output,
    ),
    Case(
        "compute --max-seconds with a unit that is not a time",
        _compute("--max-seconds", "3 m"),
        2,
        r"^error: --max-seconds: expected a unit of s, found 'm' in '3 m'$",
        _no_output,
    ),
    Case(
        "compute --max-seconds of zero",
        _compute("--max-seconds", "0 s"),
        2,
        r"^error: --max-seconds: expected a time > 0 s, found '0 s'$",
        _no_output,
    ),
    Case(
        "compute --name with a CSV of compounds",
        lambda f: (
            (f / "lib.csv").write_text("compound,smiles\nwater,O\n", encoding="utf-8"),
            ["compute", str(f / "lib.csv"), "--name", "x", "--out", str(f / "computed.csv")],
        )[1],
        2,
        r"^error: --name: expected one molecule \(a SMILES or a structure file\), found the CSV "
        r"lib\.csv",
        _no_output,
    ),
    Case(
        "estimate --temperature below zero kelvin",
        lambda f: [*_library("compound,smiles\nethanol,CCO\n")(f), "--temperature", "-3 K"],
        2,
        r"^error: --temperature: expected a temperature > 0 K, found '-3 K'$",
        lambda f: None if not (f / "est.csv").exists() else pytest.fail("est.csv written"),
    ),
    Case(
        "compute --conformers at a temperature of 0 K",
        _compute("--conformers", "4", "--temperature", "0"),
        2,
        r"^error: --temperature: expected a temperature > 0 K, found 0\.0$",
        _no_output,
    ),
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_catalogue_structure(case, tmp_path):
    if "needs-mendeleev" in case.tags and not has("mendeleev"):
        pytest.skip("needs mendeleev: pip install 'polarbeam[atoms]'")
    run_case(case, tmp_path)
