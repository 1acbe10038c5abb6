"""Catalogue cases of issue 16: rotational temperatures and the shared thermometer offset.

A rotational temperature ≤ 0 or rows of one series that disagree fail only their compound (one
line naming file, line and column); a rotational temperature above the source temperature by
more than its error is a warning; a bad ``[source]`` table stops the run with one line.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest
from _harness import Case, edit, run_case, small_campaign

ROT = ("rotational_temperature_K", "rotational_temperature_err_K")


def _analyze(folder: Path, camp: Path) -> list[str]:
    return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]


def _no_outputs(folder: Path) -> None:
    assert not (folder / "out" / "properties.csv").exists()


def _with_rotational(cell):
    """The clean campaign with the two rotational columns; ``cell(compound, T, k)`` gives the
    (value, error) strings of the k-th row of a series."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        p = camp.parent / "shifts.csv"
        with p.open(newline="", encoding="utf-8") as h:
            rows = list(csv.reader(h))
        seen: dict[tuple[str, str], int] = {}
        with p.open("w", newline="", encoding="utf-8") as h:
            w = csv.writer(h, lineterminator="\n")
            w.writerow([*rows[0], *ROT])
            for r in rows[1:]:
                k = seen.setdefault((r[0], r[1]), 0)
                seen[(r[0], r[1])] += 1
                w.writerow([*r, *cell(r[0], float(r[1]), k)])
        return _analyze(folder, camp)

    return build


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


def _warns(folder: Path) -> None:
    props = _props(folder)
    assert props["cmp-2"]["status"] == "warning", props["cmp-2"]
    assert "rotational cooling cannot heat" in props["cmp-2"]["message"]
    assert "rotational cooling cannot heat" not in props["cmp-1"]["message"]


def _offset(text: str):
    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        camp.write_text(camp.read_text(encoding="utf-8") + f"\n[source]\n{text}\n")
        return _analyze(folder, camp)

    return build


def _offset_ok(folder: Path) -> None:
    doc = json.loads((folder / "out" / "results.json").read_text(encoding="utf-8"))
    assert doc["campaign"]["stated_inputs"]["source.thermometer_offset"]["error"] == 2.0
    for c in doc["compounds"]:  # one offset shared by every compound: in every α budget
        assert "source: thermometer offset" in c["alpha_budget"], c["alpha_budget"]


CASES = [
    Case(
        "rotational temperature zero",
        _with_rotational(
            lambda n, t, k: ("0" if n == "cmp-1" and t == 450 else f"{t / 10:g}", "1")
        ),
        1,
        None,
        _fails_first("column 'rotational_temperature_K' expected a number > 0, found '0'"),
    ),
    Case(
        "rotational temperature negative",
        _with_rotational(lambda n, t, k: ("-20" if n == "cmp-1" else f"{t / 10:g}", "1")),
        1,
        None,
        _fails_first("shifts.csv line 2: column 'rotational_temperature_K' expected a number > 0"),
    ),
    Case(
        "rotational temperature differs within a series",
        _with_rotational(lambda n, t, k: ("31" if n == "cmp-1" and k == 3 else f"{t / 10:g}", "1")),
        1,
        None,
        _fails_first(
            "shifts.csv line 5: column 'rotational_temperature_K' expected the same value for "
            "every row of series cmp-1 @ 300 K ('30' at line 2), found '31'"
        ),
    ),
    Case(
        "rotational temperature above the source",
        _with_rotational(lambda n, t, k: (f"{t + 50:g}" if n == "cmp-2" else f"{t:g}", "2")),
        0,
        None,
        _warns,
    ),
    Case(
        "one rotational temperature for every series",
        _with_rotational(lambda n, t, k: ("40" if n == "cmp-1" else f"{t / 10:g}", "1")),
        1,
        None,
        _fails_first("every series states the same rotational temperature (40 K)"),
    ),
    Case("thermometer offset", _offset('thermometer_offset = "0 ± 2 K"'), 0, None, _offset_ok),
    Case(
        "thermometer offset in metres",
        _offset('thermometer_offset = "0 ± 2 m"'),
        2,
        r"campaign\.toml \[source\] thermometer_offset: ",
        _no_outputs,
    ),
    Case(
        "unknown key in [source]",
        _offset('nozzle = "300 K"'),
        2,
        r"campaign\.toml: unknown key\(s\) in \[source\]: 'nozzle'; expected one of "
        r"thermometer_offset$",
        _no_outputs,
    ),
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_catalogue_temperatures(case, tmp_path):
    run_case(case, tmp_path)


def test_edit_helper_is_shared():
    """The harness's ``edit`` is the one every catalogue area uses (imported, not copied)."""
    assert callable(edit)
