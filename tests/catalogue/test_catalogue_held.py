"""Catalogue: bad inputs that polarbeam already handles well, kept as regressions.

Each case is tried as a careful user or an attacker would (campaign.toml keys and tables, the
table files, the command-line options of every command) and asserts the exit code, the one line
on stderr and what is left on disk.
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import numpy as np
import pytest
from _harness import Case, edit, run_case, small_campaign

from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

OUT = "out"

TWO_WIRE = """model = "two-wire"
entrance = "0.22 ± 0.001 m"
length = "0.1 ± 0.0004 m"
line_half_spacing = "2 ± 0.004 mm"
convex_crossing = "1.6 ± 0.0032 mm"
concave_crossing = "3.4 ± 0.0068 mm"
beam_height = "2.4 ± 0.0048 mm"
"""

UNIFORM = """model = "uniform"
entrance = "0.22 ± 0.001 m"
length = "0.1 ± 0.0005 m"
field_factor = "150000000 ± 7.5e+05 m^-3"
"""

FIELD_MAP = """model = "field-map"
entrance = "0.22 ± 0.001 m"
field_map = "map.csv"
field_scale = "1 ± 0.01"
"""

PLAN = """
[plan]
temperature_range_K = [340, 640]
n_temperatures = 3
temperature_err = "2 K"
velocity = "210 ± 1.3 m/s"
velocity_spread = "25 m/s"
visibility = 0.25
count_rate = "240 counts/s"
dark_rate = "5 counts/s"
bins = 40
scan_time = "20 s"
scan_dead_time = "4 s"
reference_every = 2
n_voltages = 6
scans_per_voltage = 3
phase_limit = "3 rad"
visibility_floor = 0.075
phase_drift = "2e-4 rad/s"
phase_diffusion = "2e-5 rad^2/s"
target_alpha_rel = 0.02
target_dipole_D = 0.1
seed = 2029
"""


# --- builders -------------------------------------------------------------------------------


def _analyze(folder: Path, camp: Path, *more: str) -> list[str]:
    return ["analyze", str(camp), "--out", str(folder / OUT), "--quiet", *more]


def _with(*edits: tuple[str, str], more: tuple[str, ...] = ()):
    """The small campaign with ``edits`` to campaign.toml, analysed."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        for old, new in edits:
            edit(camp, old, new)
        return _analyze(folder, camp, *more)

    return build


def _table(name: str, *edits: tuple[str, str]):
    """The small campaign with ``edits`` to one of its table files, analysed."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        for old, new in edits:
            edit(camp.parent / name, old, new)
        return _analyze(folder, camp)

    return build


def _drop_column(name: str, column: str):
    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        p = camp.parent / name
        rows = [ln.split(",") for ln in p.read_text(encoding="utf-8").splitlines()]
        i = rows[0].index(column)
        p.write_text("\n".join(",".join(r[:i] + r[i + 1 :]) for r in rows) + "\n", "utf-8")
        return _analyze(folder, camp)

    return build


def _rows_of(name: str, compound: str, column: str, value: str, *, first_only: bool = False):
    """Set ``column`` to ``value`` in the rows of ``compound`` (or only its first row)."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        p = camp.parent / name
        lines = p.read_text(encoding="utf-8").splitlines()
        i = lines[0].split(",").index(column)
        done = False
        for k, ln in enumerate(lines[1:], 1):
            cells = ln.split(",")
            if cells[0] == compound and not (first_only and done):
                cells[i] = value
                lines[k] = ",".join(cells)
                done = True
        p.write_text("\n".join(lines) + "\n", encoding="utf-8")
        return _analyze(folder, camp)

    return build


def _deflector(block: str, *, files: dict[str, str] | None = None, more: str = ""):
    """The small campaign with its [deflector] table replaced by ``block``."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        edit(camp, UNIFORM, block + more)
        for name, text in (files or {}).items():
            (camp.parent / name).write_text(text, encoding="utf-8")
        return _analyze(folder, camp)

    return build


def _layout(layout: str, *edits: tuple[str, str], files: dict[str, str] | None = None):
    """A simulated campaign of another layout with ``edits`` to campaign.toml, analysed."""

    def build(folder: Path) -> list[str]:
        spec = {
            "time-domain": InstrumentSpec.time_domain,
            "beam-profile": InstrumentSpec.beam_profile,
        }
        comps = [CompoundTruth("cmp-1", 150.0, 15.0, 0.0, (300.0, 450.0, 600.0))]
        truth = simulate_campaign(
            folder / "camp", comps, spec=spec[layout](), seed=np.random.default_rng(5)
        )
        camp = truth.path / "campaign.toml"
        for old, new in edits:
            edit(camp, old, new)
        for name, text in (files or {}).items():
            (camp.parent / name).write_text(text, encoding="utf-8")
        return _analyze(folder, camp)

    return build


def _rewrite(fn):
    """The small campaign; ``fn(campaign_folder)`` rewrites files; analysed."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        fn(camp.parent)
        return _analyze(folder, camp)

    return build


def _cli(fn):
    """The small campaign; ``fn(folder, camp)`` returns the command line."""

    def build(folder: Path) -> list[str]:
        return fn(folder, small_campaign(folder))

    return build


# --- checks ---------------------------------------------------------------------------------


def _no_outputs(folder: Path) -> None:
    assert not (folder / OUT / "properties.csv").exists()
    assert not (folder / OUT / "results.json").exists()


def _results(folder: Path) -> dict:
    return json.loads((folder / OUT / "results.json").read_text(encoding="utf-8"))


def _statuses(**want: str):
    """results.json written with these statuses (other compounds kept)."""

    def check(folder: Path) -> None:
        by = {c["compound"]: c["status"] for c in _results(folder)["compounds"]}
        for name, status in want.items():
            assert by.get(name.replace("_", "-")) == status, by
        assert (folder / OUT / "properties.csv").exists()

    return check


def _names(*expected: str):
    def check(folder: Path) -> None:
        names = [c["compound"] for c in _results(folder)["compounds"]]
        assert sorted(names) == sorted(expected), names
        props = (folder / OUT / "properties.csv").read_text(encoding="utf-8")
        for n in expected:
            assert n in props

    return check


def _nothing_at(name: str):
    def check(folder: Path) -> None:
        assert not (folder / name).exists(), sorted(p.name for p in folder.iterdir())

    return check


BOM = "\ufeff"


def _bom(name: str):
    def fn(d: Path) -> None:
        p = d / name
        p.write_bytes(BOM.encode() + p.read_bytes())

    return fn


def _crlf(d: Path) -> None:
    for p in d.iterdir():
        p.write_bytes(p.read_bytes().replace(b"\r\n", b"\n").replace(b"\n", b"\r\n"))


def _rename_all(names: dict[str, str]):
    def fn(d: Path) -> None:
        for f in ("shifts.csv", "compounds.csv"):
            p = d / f
            lines = p.read_text(encoding="utf-8").splitlines()
            out = [lines[0]]
            for ln in lines[1:]:
                first, _, rest = ln.partition(",")
                out.append(f"{names.get(first, first)},{rest}")
            p.write_text("\n".join(out) + "\n", encoding="utf-8")

    return fn


LONG = "cmp-" + "x" * 600
UNICODE = "Ä-β-ネ-ŋ 2"


def _dup_compound(d: Path) -> None:
    p = d / "compounds.csv"
    p.write_text(p.read_text(encoding="utf-8") + "cmp-1,151,0,\n", encoding="utf-8")


def _extra_in_shifts(d: Path) -> None:
    p = d / "shifts.csv"
    lines = p.read_text(encoding="utf-8").splitlines()
    extra = [ln.replace("cmp-1,", "cmp-9,", 1) for ln in lines if ln.startswith("cmp-1,")]
    p.write_text("\n".join(lines + extra) + "\n", encoding="utf-8")


def _one_voltage(d: Path) -> None:
    p = d / "shifts.csv"
    lines = p.read_text(encoding="utf-8").splitlines()
    keep, seen = [lines[0]], set()
    for ln in lines[1:]:
        c = ln.split(",")
        if c[0] == "cmp-2":
            key = c[1]
            if key in seen:
                continue
            seen.add(key)
        keep.append(ln)
    p.write_text("\n".join(keep) + "\n", encoding="utf-8")


def _all_temps(value: str):
    def fn(d: Path) -> None:
        p = d / "shifts.csv"
        lines = p.read_text(encoding="utf-8").splitlines()
        out = [lines[0]]
        for ln in lines[1:]:
            c = ln.split(",")
            c[3] = value
            out.append(",".join(c))
        p.write_text("\n".join(out) + "\n", encoding="utf-8")

    return fn


MAP_OK = "z_m,field_factor_m3\n" + "".join(
    f"{0.2 + 0.01 * i:.2f},{1.5e8 if 2 <= i <= 12 else 0.0:g}\n" for i in range(15)
)


def _failed(*names: str):
    """The run went on: results.json lists exactly ``names`` as failed, the others ok."""

    def check(folder: Path) -> None:
        doc = _results(folder)
        failed = sorted(c["compound"] for c in doc["compounds"] if c["status"] == "failed")
        assert failed == sorted(names), doc["compounds"]
        for f in ("properties.csv", "series.csv", "report.md"):
            assert (folder / OUT / f).exists(), f

    return check


def _ok(folder: Path) -> None:
    assert {c["status"] for c in _results(folder)["compounds"]} == {"ok"}


def _demo_file(folder: Path) -> list[str]:
    (folder / "x").write_text("mine", encoding="utf-8")
    return ["demo", "--out", str(folder / "x")]


def _file_kept(folder: Path) -> None:
    assert (folder / "x").read_text(encoding="utf-8") == "mine"


def _toml_dir(folder: Path, camp: Path) -> list[str]:
    (camp.parent / "sub.toml").mkdir()
    return _analyze(folder, camp.parent / "sub.toml")


TD_WAVE = ('field_duration = "40 ± 0.02 us"', 'waveform = "w.csv"')
MISBEHAVES = "misbehaves today (issue 15 catalogue): "

CASES = [
    # -- campaign.toml: unknown keys and tables, wrong types ------------------------------------
    Case(
        "unknown key in [campaign]",
        _with(("[campaign]", '[campaign]\ntitel = "x"')),
        2,
        r"^error: campaign\.toml: unknown key\(s\) in \[campaign\]: 'titel'; expected one of "
        r"title, description \(did you mean 'title'\?\)$",
        _no_outputs,
    ),
    Case(
        "unknown key in [instrument]",
        _with(("[instrument]", '[instrument]\ngrating_perod = "266 nm"')),
        2,
        r"^error: campaign\.toml: unknown key\(s\) in \[instrument\]: 'grating_perod'; "
        r"expected one of layout, grating_period,",
        _no_outputs,
    ),
    Case(
        "unknown key in [deflector]",
        _with(("[deflector]", '[deflector]\nlenght = "0.1 m"')),
        2,
        r"^error: campaign\.toml: unknown key\(s\) in \[deflector\]: 'lenght'; expected one of "
        r"model, entrance, length,",
        _no_outputs,
    ),
    Case(
        "unknown key in [data]",
        _with(("[data]", '[data]\nshift = "shifts.csv"')),
        2,
        r"^error: campaign\.toml: unknown key\(s\) in \[data\]: 'shift'; expected one of shifts,",
        _no_outputs,
    ),
    Case(
        "unknown table",
        _with(("[data]", '[instrumnet]\nlayout = "x"\n\n[data]')),
        2,
        r"^error: campaign\.toml: unknown table\(s\) 'instrumnet'; expected campaign, "
        r"instrument, deflector, data",
        _no_outputs,
    ),
    Case(
        "grating_period as a list",
        _with(('grating_period = "266 nm"', 'grating_period = ["266 nm"]')),
        2,
        r"^error: campaign\.toml \[instrument\] grating_period: expected a quantity string like "
        r"'1\.2 ± 0\.1 mm', found list$",
        _no_outputs,
    ),
    Case(
        "grating_positions as a string",
        _with(
            (
                'grating_positions = ["0 m", "0.38 ± 0.0002 m", "0.76 ± 0.0002 m"]',
                'grating_positions = "0 m"',
            )
        ),
        2,
        r"^error: campaign\.toml \[instrument\] grating_positions: expected a list of three "
        r"quantities, found '0 m'$",
        _no_outputs,
    ),
    Case(
        "title as a number",
        _with(('title = "simulated campaign"', "title = 5")),
        2,
        r"^error: campaign\.toml \[campaign\] title: expected a string, found 5$",
        _no_outputs,
    ),
    Case(
        "field_factor without a number or unit",
        _with(('field_factor = "150000000 ± 7.5e+05 m^-3"', 'field_factor = "lots"')),
        2,
        r"^error: campaign\.toml \[deflector\] field_factor: expected 'value \[± error\] unit', "
        r"found 'lots'$",
        _no_outputs,
    ),
    Case(
        "empty campaign.toml",
        _rewrite(lambda d: (d / "campaign.toml").write_text("", encoding="utf-8")),
        2,
        r"^error: campaign\.toml \[instrument\] layout: required key missing$",
        _no_outputs,
    ),
    # -- campaign.toml: layouts and deflector models --------------------------------------------
    Case(
        "grating_positions not increasing",
        _with(('"0.38 ± 0.0002 m", "0.76', '"0.76 ± 0.0002 m", "0.38')),
        2,
        r"^error: campaign\.toml \[instrument\] grating_positions: expected z1 < z2 < z3, "
        r"found 0\.0, 0\.76, 0\.38$",
        _no_outputs,
    ),
    Case(
        "two grating positions for talbot-lau",
        _with(('"0 m", "0.38 ± 0.0002 m", ', '"0 m", ')),
        2,
        r"^error: campaign\.toml \[instrument\] grating_positions: expected a list of three "
        r"quantities, found \['0 m', '0\.76 ± 0\.0002 m'\]$",
        _no_outputs,
    ),
    Case(
        "missing grating_period",
        _with(('grating_period = "266 nm"\n', "")),
        2,
        r"^error: campaign\.toml \[instrument\] grating_period: required for layout "
        r"'talbot-lau'$",
        _no_outputs,
    ),
    Case(
        "beam-profile without detector_position",
        _layout("beam-profile", ('detector_position = "1.45 ± 0.001 m"\n', "")),
        2,
        r"^error: campaign\.toml \[instrument\] detector_position: required for layout "
        r"'beam-profile'$",
        _no_outputs,
    ),
    Case(
        "unknown deflector model",
        _with(('model = "uniform"', 'model = "quadrupole"')),
        2,
        r"^error: campaign\.toml \[deflector\] model: expected one of uniform, two-wire, "
        r"field-map, numerical, found 'quadrupole'$",
        _no_outputs,
    ),
    Case(
        "missing [deflector] table",
        _deflector(""),
        2,
        r"^error: campaign\.toml \[deflector\] model: required key missing$",
        _no_outputs,
    ),
    Case(
        "two-wire without line_half_spacing",
        _deflector(TWO_WIRE.replace('line_half_spacing = "2 ± 0.004 mm"\n', "")),
        2,
        r"^error: campaign\.toml \[deflector\] line_half_spacing: required for model "
        r"'two-wire'$",
        _no_outputs,
    ),
    Case(
        "two-wire crossings in the wrong order",
        _deflector(TWO_WIRE.replace('"1.6 ± 0.0032 mm"', '"3.6 ± 0.0032 mm"')),
        2,
        r"^error: campaign\.toml \[deflector\] convex_crossing: expected 0 < z1 < "
        r"line_half_spacing \(0\.002\), found 0\.0036",
        _no_outputs,
    ),
    Case(
        "field map without the field_factor_m3 column",
        _deflector(FIELD_MAP, files={"map.csv": MAP_OK.replace("field_factor_m3", "g")}),
        2,
        r"^error: map\.csv: missing column\(s\) field_factor_m3; expected z_m, field_factor_m3, "
        r"found z_m, g$",
        _no_outputs,
    ),
    Case(
        "field map with a non-numeric cell",
        _deflector(FIELD_MAP, files={"map.csv": MAP_OK.replace("0.25,", "abc,", 1)}),
        2,
        r"^error: map\.csv line 7: column 'z_m' expected a number, found 'abc'$",
        _no_outputs,
    ),
    Case(
        "field map file missing",
        _deflector(FIELD_MAP),
        2,
        r"^error: .*map\.csv: field map file not found$",
        _no_outputs,
    ),
    Case(
        "time-domain pulse_times not increasing",
        _layout("time-domain", ('"24 us", "48 us"', '"48 us", "24 us"')),
        2,
        r"^error: campaign\.toml \[instrument\] pulse_times: expected t1 < t2 < t3, "
        r"found 0\.0, 4\.8e-05, 2\.4e-05$",
        _no_outputs,
    ),
    Case(
        "time-domain waveform and field_duration both",
        _layout("time-domain", ("[data]", 'waveform = "w.csv"\n\n[data]')),
        2,
        r"^error: campaign\.toml \[deflector\] field_duration, waveform: expected one of them "
        r"\(the waveform fixes the switching\), found both$",
        _no_outputs,
    ),
    Case(
        "time-domain waveform missing its amplitude column",
        _layout("time-domain", TD_WAVE, files={"w.csv": "t_s,amp\n0,0\n1e-5,1\n4e-5,1\n"}),
        2,
        r"^error: w\.csv: missing column\(s\) amplitude; expected t_s, amplitude, found t_s, amp$",
        _no_outputs,
    ),
    Case(
        "time-domain waveform with a non-numeric cell",
        _layout("time-domain", TD_WAVE, files={"w.csv": "t_s,amplitude\n0,0\n1e-5,high\n4e-5,1\n"}),
        2,
        r"^error: w\.csv line 3: column 'amplitude' expected a number, found 'high'$",
        _no_outputs,
    ),
    # -- table files ---------------------------------------------------------------------------
    Case(
        "shifts.csv without phase_err_rad",
        _drop_column("shifts.csv", "phase_err_rad"),
        2,
        r"^error: shifts\.csv: missing column\(s\) phase_err_rad; expected compound, .*, "
        r"found compound, .*, phase_rad$",
        _no_outputs,
    ),
    Case(
        "compounds.csv without mass_u (no structures): every compound fails",
        _drop_column("compounds.csv", "mass_u"),
        2,
        None,
        _failed("cmp-1", "cmp-2"),
    ),
    Case("compound twice in compounds.csv", _rewrite(_dup_compound), 1, None, _failed("cmp-1")),
    Case(
        "compound in shifts.csv but not in compounds.csv",
        _rewrite(_extra_in_shifts),
        1,
        None,
        _failed("cmp-9"),
    ),
    Case(
        "negative temperature in a row",
        _rows_of("shifts.csv", "cmp-2", "temperature_K", "-300", first_only=True),
        1,
        None,
        _failed("cmp-2"),
    ),
    Case(
        "zero velocity in a row",
        _rows_of("shifts.csv", "cmp-2", "velocity_m_s", "0", first_only=True),
        1,
        None,
        _failed("cmp-2"),
    ),
    Case(
        "NaN phase error",
        _rows_of("shifts.csv", "cmp-2", "phase_err_rad", "nan", first_only=True),
        1,
        None,
        _failed("cmp-2"),
    ),
    Case(
        "non-numeric mass",
        _rows_of("compounds.csv", "cmp-2", "mass_u", "heavy"),
        1,
        None,
        _failed("cmp-2"),
    ),
    Case("fewer than two voltages", _rewrite(_one_voltage), 1, None, _failed("cmp-2")),
    Case(
        "all compounds failing (negative velocities)",
        _rewrite(_all_temps("-5")),
        2,
        None,
        _failed("cmp-1", "cmp-2"),
    ),
    # -- command-line options of every command --------------------------------------------------
    Case(
        "--jobs -3",
        _with(more=("--jobs", "-3")),
        2,
        r"^error: --jobs: expected 0 \(all cores\) or a positive number, found -3$",
        _no_outputs,
    ),
    Case("--jobs two", _with(more=("--jobs", "two")), 2, None, _nothing_at(OUT)),
    Case(
        "--report-details abc", _with(more=("--report-details", "abc")), 2, None, _nothing_at(OUT)
    ),
    Case(
        "--report-details -1 (documented: all compounds)",
        _with(more=("--report-details", "-1")),
        0,
        None,
        _ok,
    ),
    Case(
        "--scheduler plain garbage",
        _with(more=("--scheduler", "garbage")),
        2,
        r"^error: --scheduler: expected 'local' or an address like tcp://host:8786, "
        r"found 'garbage'$",
        _no_outputs,
    ),
    Case(
        "reduce on a shifts campaign",
        _cli(lambda f, c: ["reduce", str(c), "--out", str(f / "phases.csv")]),
        2,
        r"^error: campaign\.toml \[data\] scans: expected a raw-scan file to reduce, found none$",
        _nothing_at("phases.csv"),
    ),
    Case(
        "plan on a campaign without [plan]",
        _cli(lambda f, c: ["plan", str(c), "--out", str(f / "plan")]),
        2,
        r"^error: campaign\.toml \[plan\]: required table missing",
        _nothing_at("plan"),
    ),
    Case("field without --voltage", _cli(lambda f, c: ["field", str(c)]), 2),
    Case(
        "field at 0 V",
        _cli(lambda f, c: ["field", str(c), "--voltage", "0 V"]),
        2,
        r"^error: --voltage: expected a non-zero voltage, found '0 V'$",
    ),
    Case(
        "field at 10 parsecs",
        _cli(lambda f, c: ["field", str(c), "--voltage", "10 parsecs"]),
        2,
        r"^error: --voltage: expected a unit of V, found 'parsecs' in '10 parsecs'$",
    ),
    Case(
        "field --voltage without a unit or number",
        _cli(lambda f, c: ["field", str(c), "--voltage", "abc"]),
        2,
        r"^error: --voltage: expected 'value \[± error\] unit', found 'abc'$",
    ),
    Case(
        "estimate on a missing file",
        lambda f: ["estimate", str(f / "none.csv"), "--out", str(f / "e.csv")],
        2,
        r"^error: .*none\.csv: input file not found$",
        _nothing_at("e.csv"),
    ),
    Case(
        "estimate on a CSV without smiles",
        _cli(lambda f, c: ["estimate", str(c.parent / "shifts.csv"), "--out", str(f / "e.csv")]),
        2,
        r"^error: .*shifts\.csv: expected columns 'compound' and 'smiles', missing \['smiles'\]",
        _nothing_at("e.csv"),
    ),
    Case(
        "simulate --layout nonsense",
        lambda f: ["simulate", "--out", str(f / "sim"), "--layout", "nonsense"],
        2,
        r"^error: --layout: expected one of talbot-lau, beam-profile, time-domain, "
        r"found 'nonsense'$",
        _nothing_at("sim"),
    ),
    Case(
        "a folder without campaign.toml",
        lambda f: _analyze(f, f),
        2,
        r"expected campaign \.toml files or subfolders with campaign\.toml, found none$",
        _nothing_at(OUT),
    ),
    Case(
        "campaign .toml that is a directory",
        _cli(_toml_dir),
        2,
        r"sub\.toml: expected campaign \.toml files or subfolders with campaign\.toml",
        _nothing_at(OUT),
    ),
    # -- encodings, line endings and names -------------------------------------------------------
    Case("BOM at the start of shifts.csv", _rewrite(_bom("shifts.csv")), 0, None, _ok),
    Case("CRLF line endings in every file", _rewrite(_crlf), 0, None, _ok),
    Case(
        "extremely long compound name",
        _rewrite(_rename_all({"cmp-2": LONG})),
        0,
        None,
        _names("cmp-1", LONG),
    ),
    Case(
        "non-ASCII compound names",
        _rewrite(_rename_all({"cmp-2": UNICODE})),
        0,
        None,
        _names("cmp-1", UNICODE),
    ),
    # -- fixed after the catalogue found them ---------------------------------------------------
    Case(
        "BOM at the start of campaign.toml",
        _rewrite(_bom("campaign.toml")),
        0,
        None,
        _ok,
    ),
    Case(
        "--report-details -5",
        _with(more=("--report-details", "-5")),
        2,
        r"^error: --report-details: expected",
        _no_outputs,
    ),
    Case(
        "--scheduler with a malformed tcp address",
        _with(more=("--scheduler", "tcp://garbage:::")),
        2,
        r"^error: --scheduler: expected",
        _no_outputs,
    ),
    Case(
        "demo --out pointing at a file",
        _demo_file,
        2,
        r"--out expected a folder, found a file",
        _file_kept,
    ),
]

# What a usage error of the command-line parser (not polarbeam's own "error:" line) must say.
USAGE = {
    "--jobs two": r"Invalid value for '--jobs'",
    "--report-details abc": r"Invalid value for '--report-details'",
    "field without --voltage": r"Missing option '--voltage'",
}

# The "failed:" line each failing compound gets (the run goes on).
FAILED = {
    "compound twice in compounds.csv": r"failed: cmp-1: compounds\.csv line 4: compound 'cmp-1' "
    r"listed twice",
    "compound in shifts.csv but not in compounds.csv": r"failed: cmp-9: compounds\.csv: compound "
    r"'cmp-9' measured in shifts\.csv but not listed \(expected a row with its mass_u\)",
    "negative temperature in a row": r"failed: cmp-2: shifts\.csv line 29: column "
    r"'temperature_K' expected a number > 0, found '-300'",
    "zero velocity in a row": r"failed: cmp-2: shifts\.csv line 29: column 'velocity_m_s' "
    r"expected a number > 0, found '0'",
    "NaN phase error": r"failed: cmp-2: shifts\.csv line 29: column 'phase_err_rad' expected a "
    r"number > 0, found 'nan'",
    "non-numeric mass": r"failed: cmp-2: compounds\.csv line 3: column 'mass_u' expected a "
    r"number > 0, found 'heavy'",
    "fewer than two voltages": r"failed: cmp-2: shifts\.csv: series cmp-2 @ 300 K expected at "
    r"least two different voltages \(\|V\|\), found 1",
    "all compounds failing (negative velocities)": r"failed: cmp-1: shifts\.csv line 2: column "
    r"'velocity_m_s' expected a number > 0, found '-5'",
    "compounds.csv without mass_u (no structures): every compound fails": r"failed: cmp-1: "
    r"compounds\.csv line 2: column 'mass_u' expected a number > 0 \(or a structure to take the "
    r"mass from\), found ''",
}


def _id(case) -> str:
    return case.id


@pytest.mark.parametrize("case", CASES, ids=_id)
def test_catalogue_held(case, tmp_path):
    result = run_case(case, tmp_path)
    if case.id in USAGE:
        assert re.search(USAGE[case.id], result.output), result.output
    if case.id in FAILED:
        assert re.search(FAILED[case.id], result.output), result.output


def test_every_usage_and_failed_pattern_names_a_case():
    ids = {c.id for c in CASES if isinstance(c, Case)}
    assert set(USAGE) <= ids and set(FAILED) <= ids
