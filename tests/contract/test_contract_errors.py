"""Every input error branch: structural errors stop the run (exit 2) with a one-line message;
bad row values fail only their compound (exit 1, or 2 when every compound failed)."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from typer.testing import CliRunner

from polarbeam.cli.commands import app
from polarbeam.contract.campaign import load_campaign
from polarbeam.errors import InputError, PolarbeamError
from polarbeam.pipeline.analysis import analyze

runner = CliRunner()


def _edit(path: Path, old: str, new: str) -> None:
    text = path.read_text()
    assert old in text, old
    path.write_text(text.replace(old, new, 1))


def _run(camp: Path, out: Path):
    return runner.invoke(app, ["analyze", str(camp), "--out", str(out), "--quiet"])


@pytest.fixture
def camp(simple_campaign):
    return simple_campaign.path / "campaign.toml"


def test_clean_campaign_exit_zero(camp, tmp_path):
    r = _run(camp, tmp_path / "out")
    assert r.exit_code == 0, r.output
    for f in ("series.csv", "properties.csv", "results.json", "report.md"):
        assert (tmp_path / "out" / f).is_file()


@pytest.mark.parametrize(
    "old,new,pattern",
    [
        ('layout = "talbot-lau"', 'layout = "sideways"', r"layout: expected one of talbot-lau"),
        ('model = "uniform"', 'model = "magic"', r"model: expected one of uniform"),
        ("[data]", "[data]\nbogus = 1", r"unknown key\(s\) in \[data\]: 'bogus'"),
        ("[campaign]", "[mystery]\n[campaign]", r"unknown table\(s\) 'mystery'"),
        ('length = "0.1', 'length = "0.1 K', r"\[deflector\] length: expected a unit of m"),
        ('shifts = "shifts.csv"', 'shifts = "nowhere.csv"', r"nowhere.csv: shifts file not found"),
        ('title = "simulated campaign"', 'title = "unterminated', r"invalid TOML"),
        ('grating_period = "266 nm"\n', "", r"grating_period: required for layout"),
        ("[deflector]", '[deflector]\nbeam_height = "1 mm"', r"beam_height: not used by model"),
        (
            "[instrument]",
            '[instrument]\ndetector_position = "1 m"',
            r"detector_position: not used by layout",
        ),
    ],
)
def test_structural_errors_exit_2_one_line(camp, tmp_path, old, new, pattern):
    _edit(camp, old, new)
    with pytest.raises(InputError, match=pattern):
        load_campaign(camp)
    r = _run(camp, tmp_path / "out")
    assert r.exit_code == 2
    err = r.stderr if hasattr(r, "stderr") else r.output
    assert "Traceback" not in r.output
    lines = [ln for ln in err.strip().splitlines() if ln]
    assert len(lines) == 1 and lines[0].startswith("error: ") and re.search(pattern, lines[0])


def test_missing_column_is_structural(camp, tmp_path):
    shifts = camp.parent / "shifts.csv"
    text = shifts.read_text().replace("phase_err_rad", "phase_error", 1)
    shifts.write_text(text)
    with pytest.raises(InputError, match=r"shifts.csv: missing column\(s\) phase_err_rad"):
        load_campaign(camp)
    assert _run(camp, tmp_path / "o").exit_code == 2


def test_missing_campaign_file(tmp_path):
    r = _run(tmp_path / "none.toml", tmp_path / "o")
    assert r.exit_code == 2 and "campaign file not found" in r.output


def _corrupt_row(camp: Path, compound: str, column: str, value: str) -> int:
    shifts = camp.parent / "shifts.csv"
    lines = shifts.read_text().splitlines()
    head = lines[0].split(",")
    col = head.index(column)
    for n, line in enumerate(lines[1:], start=2):
        cells = line.split(",")
        if cells[0] == compound:
            cells[col] = value
            lines[n - 1] = ",".join(cells)
            shifts.write_text("\n".join(lines) + "\n")
            return n
    raise AssertionError(compound)


@pytest.mark.parametrize(
    "column,value,expect",
    [
        ("velocity_m_s", "-3", "expected a number > 0"),
        ("velocity_m_s", "0", "expected a number > 0"),
        ("temperature_K", "-10", "expected a number > 0"),
        ("phase_rad", "nan", "expected a number"),
        ("phase_rad", "twelve", "expected a number"),
        ("voltage_V", "", "expected a number"),
    ],
)
def test_bad_row_fails_only_its_compound(camp, tmp_path, column, value, expect):
    line = _corrupt_row(camp, "polar-one", column, value)
    res = analyze(camp, tmp_path / "out")
    by = {c.compound: c for c in res.compounds}
    assert by["polar-one"].status == "failed"
    assert f"shifts.csv line {line}: column '{column}' {expect}" in by["polar-one"].message
    assert by["apolar-two"].status != "failed" and by["apolar-two"].alpha is not None
    assert res.exit_code == 1
    r = _run(camp, tmp_path / "cli")
    assert r.exit_code == 1
    props = (tmp_path / "cli" / "properties.csv").read_text()
    assert "polar-one" in props and "failed" in props and "apolar-two" in props


def test_fewer_than_two_voltages_fails_compound(camp, tmp_path):
    shifts = camp.parent / "shifts.csv"
    lines = shifts.read_text().splitlines()
    keep = [lines[0]]
    seen = 0
    for ln in lines[1:]:
        if ln.startswith("single-three,"):
            seen += 1
            if seen > 1:
                continue
        keep.append(ln)
    shifts.write_text("\n".join(keep) + "\n")
    res = analyze(camp)
    by = {c.compound: c for c in res.compounds}
    assert by["single-three"].status == "failed"
    assert "at least two different voltages" in by["single-three"].message
    assert res.exit_code == 1


def test_every_compound_failed_exit_2(camp, tmp_path):
    for name in ("polar-one", "apolar-two", "single-three"):
        _corrupt_row(camp, name, "velocity_m_s", "x")
    r = _run(camp, tmp_path / "o")
    assert r.exit_code == 2
    assert (tmp_path / "o" / "properties.csv").read_text().count("failed") == 3


def test_compound_missing_from_compounds_csv(camp):
    comp = camp.parent / "compounds.csv"
    comp.write_text(
        "\n".join(ln for ln in comp.read_text().splitlines() if not ln.startswith("apolar-two"))
        + "\n"
    )
    res = analyze(camp)
    by = {c.compound: c for c in res.compounds}
    assert by["apolar-two"].status == "failed" and "not listed" in by["apolar-two"].message
    assert by["polar-one"].status != "failed"


def test_bad_mass_fails_compound(camp):
    comp = camp.parent / "compounds.csv"
    comp.write_text(comp.read_text().replace("polar-one,180", "polar-one,-5"))
    res = analyze(camp)
    by = {c.compound: c for c in res.compounds}
    assert "column 'mass_u' expected a number > 0" in by["polar-one"].message


def test_single_temperature_leaves_alpha_empty_with_reason(camp, tmp_path):
    res = analyze(camp, tmp_path / "out")
    single = next(c for c in res.compounds if c.compound == "single-three")
    assert single.alpha is None and "single source temperature" in single.message
    row = next(
        ln
        for ln in (tmp_path / "out" / "properties.csv").read_text().splitlines()
        if ln.startswith("single-three")
    )
    assert row.split(",")[1] == ""  # alpha_A3 empty


_CELLS = st.one_of(
    st.text(alphabet=st.characters(blacklist_characters=',"\n\r'), max_size=12),
    st.sampled_from(["nan", "inf", "-inf", "1e999", "", " ", "0", "-0", "1,5", "0x10", "1e-400"]),
)


@settings(
    max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture]
)
@given(
    column=st.sampled_from(
        [
            "temperature_K",
            "velocity_m_s",
            "velocity_spread_m_s",
            "voltage_V",
            "phase_rad",
            "phase_err_rad",
            "compound",
        ]
    ),
    cell=_CELLS,
)
def test_fuzzed_shift_cells_never_crash(camp, column, cell):
    """Any garbage in one cell: a result with that compound failed (or unaffected), or one
    polarbeam error -- never another exception."""
    shifts = camp.parent / "shifts.csv"
    original = shifts.read_text()
    try:
        lines = original.splitlines()
        head = lines[0].split(",")
        cells = lines[3].split(",")
        cells[head.index(column)] = cell
        lines[3] = ",".join(cells)
        shifts.write_text("\n".join(lines) + "\n")
        try:
            res = analyze(camp)
        except PolarbeamError:
            return
        assert res.exit_code in (0, 1, 2)
        assert all(c.status in ("ok", "warning", "failed") for c in res.compounds)
    finally:
        shifts.write_text(original)
