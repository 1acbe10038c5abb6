"""Catalogue cases of issue 19: the rotor description of compounds.csv.

Rotor constants missing or in the wrong order, a dipole axis the rotor cannot have, an unknown
rotor kind or rotor columns without a rotor fail only their compound, with one line naming the
file, line and column, what was expected and what was found; the others finish. A valid rotor
row gives ``response`` in properties.csv and the ratio to Langevin–Debye per series in
results.json.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest
from _harness import Case, run_case, small_campaign

COLUMNS = ("rotor", "rot_A_MHz", "rot_B_MHz", "rot_C_MHz", "dipole_axis")


def _with_rotor(cells: dict[str, str]):
    """The clean campaign with the rotor columns; ``cells`` fill cmp-1's, cmp-2's stay empty."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        p = camp.parent / "compounds.csv"
        with p.open(newline="", encoding="utf-8") as h:
            rows = list(csv.reader(h))
        with p.open("w", newline="", encoding="utf-8") as h:
            w = csv.writer(h, lineterminator="\n")
            w.writerow([*rows[0], *COLUMNS])
            for r in rows[1:]:
                w.writerow([*r, *((cells.get(c, "") if r[0] == "cmp-1" else "") for c in COLUMNS)])
        return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]

    return build


def _props(folder: Path) -> dict[str, dict[str, str]]:
    with (folder / "out" / "properties.csv").open(newline="", encoding="utf-8") as h:
        return {r["compound"]: r for r in csv.DictReader(h)}


def _fails_first(text: str):
    def check(folder: Path) -> None:
        props = _props(folder)
        assert props["cmp-1"]["status"] == "failed", props["cmp-1"]
        assert props["cmp-1"]["message"] == text, props["cmp-1"]["message"]
        assert props["cmp-2"]["status"] != "failed", props["cmp-2"]
        assert props["cmp-2"]["response"] == "ergodic"

    return check


def _rigid_ok(kind: str):
    def check(folder: Path) -> None:
        props = _props(folder)
        assert props["cmp-1"]["status"] != "failed", props["cmp-1"]
        assert props["cmp-1"]["response"] == kind
        assert props["cmp-2"]["response"] == "ergodic"
        doc = json.loads((folder / "out" / "results.json").read_text(encoding="utf-8"))
        by = {c["compound"]: c for c in doc["compounds"]}
        ratios = [s["ld_ratio"] for s in by["cmp-1"]["series"]]
        assert len(ratios) == 3 and all(0.0 < q <= 1.0 for q in ratios), ratios
        assert all("ld_ratio" not in s for s in by["cmp-2"]["series"])

    return check


L = "compounds.csv line 2"
SYM = {"rotor": "symmetric", "rot_A_MHz": "4500", "rot_B_MHz": "1200", "rot_C_MHz": "1200"}

CASES = [
    Case("valid prolate top", _with_rotor(SYM), 0, None, _rigid_ok("symmetric")),
    Case(
        "valid linear rotor",
        _with_rotor({"rotor": "linear", "rot_B_MHz": "3000", "dipole_axis": "a"}),
        0,
        None,
        _rigid_ok("linear"),
    ),
    Case(
        "valid asymmetric top with components",
        _with_rotor(
            {
                "rotor": "asymmetric",
                "rot_A_MHz": "4000",
                "rot_B_MHz": "1500",
                "rot_C_MHz": "1200",
                "dipole_axis": "a:0.8,b:0.6",
            }
        ),
        0,
        None,
        _rigid_ok("asymmetric"),
    ),
    Case(
        "rotor constants in the wrong order",
        _with_rotor({**SYM, "rot_A_MHz": "1200", "rot_C_MHz": "4500"}),
        1,
        None,
        _fails_first(
            f"{L}: columns rot_A_MHz, rot_B_MHz, rot_C_MHz expected A ≥ B ≥ C, found "
            "A = 1200, B = 1200, C = 4500 MHz"
        ),
    ),
    Case(
        "symmetric top without rot_C_MHz",
        _with_rotor({**SYM, "rot_C_MHz": ""}),
        1,
        None,
        _fails_first(
            f"{L}: a symmetric top expected rot_A_MHz, rot_B_MHz and rot_C_MHz, found no rot_C_MHz"
        ),
    ),
    Case(
        "symmetric top that is not symmetric",
        _with_rotor({**SYM, "rot_C_MHz": "1000"}),
        1,
        None,
        _fails_first(
            f"{L}: a symmetric top expected B = C (prolate) or A = B (oblate), found "
            "A = 4500, B = 1200, C = 1000 MHz"
        ),
    ),
    Case(
        "linear rotor without B",
        _with_rotor({"rotor": "linear"}),
        1,
        None,
        _fails_first(f"{L}: a linear rotor expected rot_B_MHz only, found no rot_B_MHz"),
    ),
    Case(
        "linear rotor with A",
        _with_rotor({"rotor": "linear", "rot_A_MHz": "9000", "rot_B_MHz": "3000"}),
        1,
        None,
        _fails_first(f"{L}: a linear rotor expected rot_B_MHz only, found rot_A_MHz"),
    ),
    Case(
        "negative rotational constant",
        _with_rotor({"rotor": "linear", "rot_B_MHz": "-3000"}),
        1,
        None,
        _fails_first(f"{L}: column 'rot_B_MHz' expected a number > 0, found '-3000'"),
    ),
    Case(
        "linear rotor with a dipole along b",
        _with_rotor({"rotor": "linear", "rot_B_MHz": "3000", "dipole_axis": "b"}),
        1,
        None,
        _fails_first(
            f"{L}: column 'dipole_axis' expected a (a linear rotor's dipole lies along its axis "
            "a), found b:1"
        ),
    ),
    Case(
        "prolate top with a dipole along c",
        _with_rotor({**SYM, "dipole_axis": "c"}),
        1,
        None,
        _fails_first(
            f"{L}: column 'dipole_axis' expected a (a prolate top's dipole lies along a), found c:1"
        ),
    ),
    Case(
        "oblate top with a tilted dipole",
        _with_rotor(
            {
                **SYM,
                "rot_A_MHz": "1500",
                "rot_B_MHz": "1500",
                "rot_C_MHz": "750",
                "dipole_axis": "a:0.6,c:0.8",
            }
        ),
        1,
        None,
        _fails_first(
            f"{L}: column 'dipole_axis' expected c (an oblate top's dipole lies along c), found "
            "a:0.6, c:0.8"
        ),
    ),
    Case(
        "asymmetric top without a dipole axis",
        _with_rotor({**SYM, "rotor": "asymmetric", "rot_C_MHz": "1000"}),
        1,
        None,
        _fails_first(
            f"{L}: column 'dipole_axis' expected a, b, c or components for an asymmetric top, "
            "found ''"
        ),
    ),
    Case(
        "dipole axis not understood",
        _with_rotor({**SYM, "rotor": "asymmetric", "rot_C_MHz": "1000", "dipole_axis": "a:x"}),
        1,
        None,
        _fails_first(
            f"{L}: column 'dipole_axis' expected a, b, c or components such as 'a:0.8,b:0.6', "
            "found 'a:x'"
        ),
    ),
    Case(
        "unknown rotor kind",
        _with_rotor({"rotor": "floppy"}),
        1,
        None,
        _fails_first(
            f"{L}: column 'rotor' expected one of linear, symmetric, asymmetric (or empty: "
            "ergodic), found 'floppy'"
        ),
    ),
    Case(
        "rotor constants without a rotor",
        _with_rotor({"rot_B_MHz": "3000"}),
        1,
        None,
        _fails_first(
            f"{L}: column 'rotor' expected one of linear, symmetric, asymmetric for the rotor "
            "columns given (rot_B_MHz), found ''"
        ),
    ),
]


# ``rotor = auto``: the response from the structure (chemistry/rotors.py), stated as derived
def _with_auto(smiles: str, extra: dict[str, str] | None = None):
    """The clean campaign with cmp-1 ``rotor = auto`` and the SMILES ``smiles`` (may be '')."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        p = camp.parent / "compounds.csv"
        with p.open(newline="", encoding="utf-8") as h:
            rows = list(csv.reader(h))
        cells = {"rotor": "auto", **(extra or {})}
        at = rows[0].index("smiles")  # the clean campaign has a smiles column: cmp-1's replaced
        with p.open("w", newline="", encoding="utf-8") as h:
            w = csv.writer(h, lineterminator="\n")
            w.writerow([*rows[0], *COLUMNS])
            for r in rows[1:]:
                if r[0] == "cmp-1":
                    r = [*r[:at], smiles, *r[at + 1 :]]
                w.writerow([*r, *((cells.get(c, "") if r[0] == "cmp-1" else "") for c in COLUMNS)])
        return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]

    return build


def _auto_ok(kind: str, words: str):
    def check(folder: Path) -> None:
        props = _props(folder)
        r = props["cmp-1"]
        assert r["status"] != "failed" and r["response"] == kind, r
        assert r["response_reason"].startswith(f"rotor auto → {kind}: {words}"), r
        assert r["response_reason"].endswith("(derived from the structure)")
        assert r["response_reason"] in r["message"]
        assert props["cmp-2"]["response"] == "ergodic" and props["cmp-2"]["response_reason"] == ""
        report = (folder / "out" / "report.md").read_text(encoding="utf-8")
        assert "derived from the structure" in report

    return check


CASES += [
    Case(
        "rotor auto: rigid asymmetric top from a structure",
        _with_auto("c1ccncc1"),
        0,
        None,
        _auto_ok("asymmetric", "rigid asymmetric top, A, B, C = "),
    ),
    Case(
        "rotor auto: floppy molecule read with Langevin–Debye",
        _with_auto("CCCCO"),
        0,
        None,
        _auto_ok("ergodic", "floppy: 2 rotatable bond(s)"),
    ),
    Case(
        "rotor auto without a structure",
        _with_auto(""),
        1,
        None,
        _fails_first(
            f"{L}: rotor 'auto' expected a structure (a smiles cell or a [data] structures "
            "record), found none"
        ),
    ),
    Case(
        "rotor auto with a dipole axis given",
        _with_auto("c1ccncc1", {"dipole_axis": "a"}),
        1,
        None,
        _fails_first(
            f"{L}: rotor 'auto' derives the rotor columns from the structure; expected "
            "dipole_axis empty, found values"
        ),
    ),
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_catalogue_rotors(case, tmp_path):
    run_case(case, tmp_path)
