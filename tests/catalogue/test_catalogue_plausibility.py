"""Catalogue: plausibility. Unit slips that parse give a warning (the run goes on), naming the
key or file and row, the value and the likely slip; implausible results get status "warning"
with "check units and geometry"; a negative stated error is an error.

The ranges (10 nm–100 µm, 1e8 V/m, 1e6 V, 1–1e5 m/s, 1–1e8 u, 0.05–20 × the structure estimate,
20 D) are those of the issue; the breakdown field is an order of magnitude, from memory.
"""

from __future__ import annotations

import csv
import json
import re
from pathlib import Path

import pytest
from _harness import Case, edit, run_case, small_campaign
from typer.testing import CliRunner

from polarbeam.cli.commands import app

OUT = "out"


def _analyze(folder: Path, camp: Path) -> list[str]:
    return ["analyze", str(camp), "--out", str(folder / OUT), "--quiet"]


def _with(*edits: tuple[str, str]):
    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        for old, new in edits:
            edit(camp, old, new)
        return _analyze(folder, camp)

    return build


def _scale_column(table: str, column: str, factor: float, only_first: bool = False):
    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        path = camp.parent / table
        with path.open(newline="", encoding="utf-8") as fh:
            rows = list(csv.DictReader(fh))
        for i, row in enumerate(rows):
            if not only_first or i == 0:
                row[column] = repr(float(row[column]) * factor)
        with path.open("w", newline="", encoding="utf-8") as fh:
            w = csv.DictWriter(fh, fieldnames=list(rows[0]))
            w.writeheader()
            w.writerows(rows)
        return _analyze(folder, camp)

    return build


def _smiles(*edits: tuple[str, str]):
    """Structures for both compounds (no conformers: fast), then the edits to campaign.toml."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        comp = camp.parent / "compounds.csv"
        edit(comp, "cmp-1,150,0,", "cmp-1,150,0,c1ccccc1")
        edit(comp, "cmp-2,190,0,", "cmp-2,190,0,c1ccc2ccccc2c1")
        camp.write_text(camp.read_text() + "\n[analysis]\nconformers = 0\n")
        for old, new in edits:
            edit(camp, old, new)
        return _analyze(folder, camp)

    return build


def _kept(*patterns: str, status: dict[str, str] | None = None, verdict: str | None = None):
    """The run went on: outputs written; each pattern in results.json notes and report.md."""

    def check(folder: Path) -> None:
        out = folder / OUT
        for f in ("series.csv", "properties.csv", "results.json", "report.md"):
            assert (out / f).is_file(), f
        doc = json.loads((out / "results.json").read_text(encoding="utf-8"))
        notes = "\n".join(doc["notes"])
        # report.md escapes Markdown syntax ([ ] and the like): compare the unescaped text
        report = (out / "report.md").read_text(encoding="utf-8").replace("\\", "")
        for p in patterns:
            assert re.search(p, notes), (p, notes)
            assert re.search(p, report), p
        by_name = {c["compound"]: c for c in doc["compounds"]}
        for name, want in (status or {}).items():
            assert by_name[name]["status"] == want, by_name[name]
        if verdict is not None:
            props = (out / "properties.csv").read_text(encoding="utf-8")
            assert verdict in props, props

    return check


def _no_plausibility_warning(folder: Path) -> None:
    _kept()(folder)
    props = (folder / OUT / "properties.csv").read_text(encoding="utf-8")
    assert "check units and geometry" not in props and "implausible" not in props, props
    assert "consistent with the structure prediction" in props or "above" in props, props


# (case, the warning line expected on stderr, or None for none)
CASES: list[tuple[Case, str | None]] = [
    (
        Case(
            "grating period in mm instead of nm",
            _with(('grating_period = "266 nm"', 'grating_period = "266 mm"')),
            0,
            check=_kept(r"grating_period = 0\.266 m: expected 10 nm–100 µm; a unit slip"),
        ),
        r"^warning: campaign\.toml \[instrument\] grating_period = 0\.266 m: expected "
        r"10 nm–100 µm; a unit slip \(mm for nm\?\)$",
    ),
    (
        Case(
            "grating period as a bare number in nm",
            _with(('grating_period = "266 nm"', "grating_period = 266")),
            0,
            check=_kept(r"grating_period = 266 m"),
        ),
        r"^warning: .*grating_period = 266 m: expected 10 nm–100 µm; a unit slip \(m for nm\?\)$",
    ),
    (
        Case(
            "deflector longer than the layout",
            _with(('length = "0.1 ± 0.0005 m"', 'length = "100 ± 0.5 m"')),
            0,
            check=_kept(r"\[deflector\] length = 100 m: longer than the layout"),
        ),
        r"^warning: campaign\.toml \[deflector\] length = 100 m: longer than the layout "
        r"\(0\.76 m from the first to the last grating\); a unit slip \(m for mm\?\)$",
    ),
    (
        Case(
            "field above vacuum breakdown",
            _with(
                (
                    'field_factor = "150000000 ± 7.5e+05 m^-3"',
                    'field_factor = "150000000 ± 7.5e+05 m^-3"\nfield_per_volt = "1e7 m^-1"',
                )
            ),
            0,
            check=_kept(r"breakdown of vacuum gaps"),
        ),
        r"^warning: shifts\.csv line \d+: field = field_per_volt × \|voltage_V\| = 1e\+07 m⁻¹ × "
        r"385\.7 V = 3\.857e\+09 V/m: above the ≈1e\+08 V/m breakdown of vacuum gaps",
    ),
    (
        Case(
            "voltages in mV",
            _scale_column("shifts.csv", "voltage_V", 1e4),
            0,
            check=_kept(r"shifts\.csv line 2: voltage_V = -3\.857e\+06"),
        ),
        r"^warning: shifts\.csv line 2: voltage_V = -3\.857e\+06: expected \|V\| ≤ 1e\+06 V; "
        r"a unit slip \(values in mV\? the column is in V\) \(and \d+ more row\(s\)\)$",
    ),
    (
        Case(
            "one voltage row above 1e6 V",
            _scale_column("shifts.csv", "voltage_V", 1e4, only_first=True),
            0,
            check=_kept(r"shifts\.csv line 2: voltage_V"),
        ),
        r"^warning: shifts\.csv line 2: voltage_V = -3\.857e\+06: expected \|V\| ≤ 1e\+06 V; "
        r"a unit slip \(values in mV\? the column is in V\)$",
    ),
    (
        Case(
            "velocities in mm/s",
            _scale_column("shifts.csv", "velocity_m_s", 1e3),
            0,
            check=_kept(r"shifts\.csv line 2: velocity_m_s = 1\.8e\+05"),
        ),
        r"^warning: shifts\.csv line 2: velocity_m_s = 1\.8e\+05: expected 1–1e\+05 m/s; "
        r"a unit slip \(values in mm/s\? the column is in m/s\) \(and \d+ more row\(s\)\)$",
    ),
    (
        Case(
            "velocities in km/s",
            _scale_column("shifts.csv", "velocity_m_s", 1e-3),
            0,
            check=_kept(r"velocity_m_s = 0\.18"),
        ),
        r"^warning: shifts\.csv line 2: velocity_m_s = 0\.18: expected 1–1e\+05 m/s; "
        r"a unit slip \(values in km/s\? the column is in m/s\)",
    ),
    (
        Case(
            "mass in kg",
            _scale_column("compounds.csv", "mass_u", 1.66053906660e-27, only_first=True),
            0,
            check=_kept(r"compounds\.csv line 2: mass_u = 2\.491e-25"),
        ),
        r"^warning: compounds\.csv line 2: mass_u = 2\.491e-25: expected 1–1e\+08 u; "
        r"a unit slip \(kg for u\?\)$",
    ),
    (
        Case(
            "mass far too large",
            _scale_column("compounds.csv", "mass_u", 1e7),
            0,
            check=_kept(r"compounds\.csv line 2: mass_u = 1\.5e\+09"),
        ),
        r"^warning: compounds\.csv line 2: mass_u = 1\.5e\+09: expected 1–1e\+08 u "
        r"\(and 1 more row\(s\)\)$",
    ),
    (
        Case(
            "negative stated error",
            _with(('length = "0.1 ± 0.0005 m"', 'length = "0.1 ± -0.0004 m"')),
            2,
            r"campaign\.toml \[deflector\] length: expected a non-negative error after ±, "
            r"found '0\.1 ± -0\.0004 m'$",
            lambda f: not (f / OUT / "properties.csv").exists() or pytest.fail("outputs"),
        ),
        None,
    ),
    (
        Case(
            "100,000 spaces in a quantity",
            _with(('length = "0.1 ± 0.0005 m"', 'length = "0.1' + " " * 100_000 + 'x m"')),
            2,
            r"campaign\.toml \[deflector\] length: unknown unit",
        ),
        None,
    ),
    (
        Case(
            "period slip: implausible dipole and ratio to the structure",
            _smiles(('grating_period = "266 nm"', 'grating_period = "266 mm"')),
            0,
            check=_kept(
                r"grating_period = 0\.266 m",
                status={"cmp-1": "warning", "cmp-2": "warning"},
                verdict="implausible: check units and geometry",
            ),
        ),
        r"^warning: campaign\.toml \[instrument\] grating_period = 0\.266 m",
    ),
    (
        Case(
            "α_eff ≤ 0 (phases of the wrong sign)",
            _scale_column("shifts.csv", "phase_rad", -1.0),
            0,
            check=_kept(status={"cmp-1": "warning", "cmp-2": "warning"}),
        ),
        None,
    ),
    (
        Case(
            "plausible structured campaign stays ok",
            _smiles(),
            0,
            check=_no_plausibility_warning,
        ),
        None,
    ),
]


@pytest.mark.parametrize("case,warning", CASES, ids=lambda c: getattr(c, "id", ""))
def test_catalogue_plausibility(case, warning, tmp_path):
    result = run_case(case, tmp_path)
    stderr = result.stderr if hasattr(result, "stderr") else result.output
    warnings = [ln for ln in stderr.splitlines() if ln.startswith("warning:")]
    if warning is None:
        assert warnings == [], warnings
    else:
        assert len(warnings) == 1, warnings
        assert re.search(warning, warnings[0]), (warnings[0], warning)


def _messages(folder: Path) -> dict[str, str]:
    doc = json.loads((folder / OUT / "results.json").read_text(encoding="utf-8"))
    return {c["compound"]: c["message"] for c in doc["compounds"]}


def test_result_plausibility_messages(tmp_path):
    """The compound messages say what is implausible and "check units and geometry"."""
    args = _smiles(('grating_period = "266 nm"', 'grating_period = "266 mm"'))(tmp_path)
    assert CliRunner().invoke(app, args).exit_code == 0
    msg = _messages(tmp_path)
    assert re.search(r"α = \S+ Å³ is \S+ × the structure estimate", msg["cmp-1"]), msg
    assert "check units and geometry" in msg["cmp-1"]
    assert re.search(r"μ = \S+ D is above 20 D.*check units and geometry", msg["cmp-2"]), msg


def test_negative_alpha_eff_message(tmp_path):
    args = _scale_column("shifts.csv", "phase_rad", -1.0)(tmp_path)
    assert CliRunner().invoke(app, args).exit_code == 0
    msg = _messages(tmp_path)
    pattern = r"cmp-1 @ 300 K: α_eff = -\S+ ± \S+ Å³ ≤ 0 .*check units and geometry"
    assert re.search(pattern, msg["cmp-1"])
