"""Catalogue cases of issue 15 for the table readers and the clear one-line errors."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest
from _harness import Case, edit, run_case, small_campaign


def _analyze(folder: Path, camp: Path) -> list[str]:
    return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]


def _no_outputs(folder: Path) -> None:
    assert not (folder / "out" / "properties.csv").exists()


def _rename(names: dict[str, str]):
    """Rewrite shifts.csv and compounds.csv with the compounds renamed (csv.writer quoting)."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        for f in ("shifts.csv", "compounds.csv"):
            p = camp.parent / f
            with p.open(newline="", encoding="utf-8") as h:
                rows = list(csv.reader(h))
            with p.open("w", newline="", encoding="utf-8") as h:
                w = csv.writer(h)
                w.writerow(rows[0])
                for r in rows[1:]:
                    w.writerow([names.get(r[0], r[0]), *r[1:]])
        return _analyze(folder, camp)

    return build


ODD = "DM\u2028\x1c\x1d\x1e\x85\v\f\r\n-102"


def _names_kept(*expected: str):
    def check(folder: Path) -> None:
        doc = json.loads((folder / "out" / "results.json").read_text(encoding="utf-8"))
        names = [c["compound"] for c in doc["compounds"]]
        assert sorted(names) == sorted(expected), names

    return check


def _without_length(folder: Path) -> list[str]:
    camp = small_campaign(folder)
    lines = camp.read_text(encoding="utf-8").splitlines()
    camp.write_text("\n".join(ln for ln in lines if not ln.startswith("length")), encoding="utf-8")
    return _analyze(folder, camp)


def _empty_sdf(folder: Path) -> list[str]:
    camp = small_campaign(folder)
    (camp.parent / "s.sdf").write_text("", encoding="utf-8")
    edit(camp, "[data]", '[data]\nstructures = "s.sdf"')
    return _analyze(folder, camp)


def _utf16_computed(folder: Path) -> list[str]:
    camp = small_campaign(folder)
    (camp.parent / "computed.csv").write_text(
        "compound,method,alpha,alpha_unit\ncmp-1,x,10,A3\n", encoding="utf-16"
    )
    edit(camp, "[data]", '[data]\ncomputed = "computed.csv"')
    return _analyze(folder, camp)


def _header_only(folder: Path) -> list[str]:
    camp = small_campaign(folder)
    p = camp.parent / "shifts.csv"
    p.write_text(p.read_text(encoding="utf-8").splitlines()[0] + "\n", encoding="utf-8")
    return _analyze(folder, camp)


def _out_is_file(folder: Path) -> list[str]:
    camp = small_campaign(folder)
    (folder / "out").write_text("mine", encoding="utf-8")
    return _analyze(folder, camp)


def _nothing_written(folder: Path) -> None:
    assert not (folder / "out").exists()  # found when the campaign loads, before any work


def _file_kept(folder: Path) -> None:
    assert (folder / "out").read_text(encoding="utf-8") == "mine"


CASES = [
    Case(
        "quoted name with line and record separators",
        _rename({"cmp-2": ODD}),
        0,
        None,
        _names_kept("cmp-1", ODD),
    ),
    Case(
        "name starting with #",
        _rename({"cmp-2": "#7 batch"}),
        0,
        None,
        _names_kept("cmp-1", "#7 batch"),
    ),
    Case(
        "missing length of a uniform deflector",
        _without_length,
        2,
        r"campaign\.toml \[deflector\] length: required for model 'uniform'",
        _no_outputs,
    ),
    Case(
        "empty SDF as [data] structures",
        _empty_sdf,
        2,
        r"s\.sdf: expected SDF structure records, found an empty file$",
        _no_outputs,
    ),
    Case(
        "UTF-16 computed.csv",
        _utf16_computed,
        2,
        r"computed\.csv: cannot read computed-values file: expected UTF-8 text, found UTF-16",
        _nothing_written,
    ),
    Case(
        "shifts.csv with a header and no rows",
        _header_only,
        2,
        r"shifts\.csv: expected data rows below the header, found none$",
        _no_outputs,
    ),
    Case("--out pointing at a file", _out_is_file, 2, r"--out expected a folder", _file_kept),
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_catalogue_tables(case, tmp_path):
    run_case(case, tmp_path)
