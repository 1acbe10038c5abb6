"""Catalogue cases that hold today (kept as regressions): structural errors exit 2 with one line."""

from __future__ import annotations

from pathlib import Path

import pytest
from _harness import Case, edit, run_case, small_campaign


def _analyze(folder: Path, camp: Path) -> list[str]:
    return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]


def _with(old: str, new: str):
    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        edit(camp, old, new)
        return _analyze(folder, camp)

    return build


def _no_outputs(folder: Path) -> None:
    assert not (folder / "out" / "properties.csv").exists()


CASES = [
    Case("clean campaign", lambda f: _analyze(f, small_campaign(f)), 0),
    Case(
        "unknown layout",
        _with('layout = "talbot-lau"', 'layout = "sideways"'),
        2,
        r"layout: expected one of talbot-lau",
        _no_outputs,
    ),
    Case(
        "unit that does not fit the key",
        _with('length = "0.1', 'length = "0.1 K'),
        2,
        r"\[deflector\] length: expected a unit of m",
        _no_outputs,
    ),
    Case(
        "missing shifts file",
        _with('shifts = "shifts.csv"', 'shifts = "nowhere.csv"'),
        2,
        r"nowhere\.csv: shifts file not found",
        _no_outputs,
    ),
    Case(
        "invalid TOML",
        _with('title = "simulated campaign"', 'title = "unterminated'),
        2,
        r"invalid TOML",
        _no_outputs,
    ),
    Case(
        "missing campaign file",
        lambda f: _analyze(f, f / "nothing" / "campaign.toml"),
        2,
        r"campaign\.toml",
    ),
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_catalogue_baseline(case, tmp_path):
    run_case(case, tmp_path)
