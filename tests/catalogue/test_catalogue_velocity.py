"""Catalogue cases of issue 17: measured velocity tables, named shapes, the background
acceleration and the measured visibility.

A table that is not a distribution (a negative weight, one velocity, a velocity ≤ 0), a series
with neither a table nor a mean velocity, and a table for a series that does not exist fail only
their compound, with one line naming the file, the compound, the temperature and what was
expected; a bad ``[beam]`` or ``[instrument]`` key stops the run with one line.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import numpy as np
import pytest
from _harness import Case, edit, run_case, small_campaign


def _analyze(folder: Path, camp: Path) -> list[str]:
    return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]


def _no_outputs(folder: Path) -> None:
    assert not (folder / "out" / "properties.csv").exists()


def _gaussian_rows(name: str, temp: str, mean: float, spread: float) -> list[list[str]]:
    v = np.linspace(mean - 5 * spread, mean + 5 * spread, 41)
    w = np.exp(-0.5 * ((v - mean) / spread) ** 2)
    return [[name, temp, f"{x:.8g}", f"{y:.8g}"] for x, y in zip(v, w, strict=True)]


def _with_tables(change=None, blank=True):
    """The clean campaign with a velocities.csv table for every series (Gaussian classes of the
    stated mean and spread) and the velocity/spread cells of shifts.csv left empty (``blank``);
    ``change(rows)`` edits the table rows (compound, T, velocity, weight) before writing."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        p = camp.parent / "shifts.csv"
        with p.open(newline="", encoding="utf-8") as h:
            rows = list(csv.reader(h))
        head = rows[0]
        iv, isp = head.index("velocity_m_s"), head.index("velocity_spread_m_s")
        series = {}
        for r in rows[1:]:
            series.setdefault((r[0], r[1]), (float(r[iv]), float(r[isp])))
            if blank:
                r[iv] = r[isp] = ""
        with p.open("w", newline="", encoding="utf-8") as h:
            csv.writer(h, lineterminator="\n").writerows(rows)
        table = [r for (n, t), (m, s) in series.items() for r in _gaussian_rows(n, t, m, s)]
        if change is not None:
            table = change(table)
        with (camp.parent / "velocities.csv").open("w", newline="", encoding="utf-8") as h:
            w = csv.writer(h, lineterminator="\n")
            w.writerow(["compound", "temperature_K", "velocity_m_s", "weight"])
            w.writerows(table)
        edit(
            camp,
            'compounds = "compounds.csv"',
            'compounds = "compounds.csv"\nvelocities = "velocities.csv"',
        )
        return _analyze(folder, camp)

    return build


def _toml(old: str, new: str):
    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        edit(camp, old, new)
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


def _tables_used(folder: Path) -> None:
    props = _props(folder)
    assert all(p["status"] != "failed" for p in props.values()), props
    doc = json.loads((folder / "out" / "results.json").read_text(encoding="utf-8"))
    for c in doc["compounds"]:
        for s in c["series"]:  # the series' velocity is the table's mean (180 m/s stated)
            assert abs(s["velocity_m_s"] - 180.0) < 1e-6, s["velocity_m_s"]
        assert any(k.startswith("velocity: ") for k in c["alpha_budget"]), c["alpha_budget"]


def _at(name: str, temp: str, fn):
    """Apply ``fn`` to the rows of one series of the table (the others unchanged)."""

    def change(rows):
        mine = [r for r in rows if r[0] == name and r[1] == temp]
        rest = [r for r in rows if not (r[0] == name and r[1] == temp)]
        return rest + fn(mine)

    return change


def _negative(rows):
    rows[3][3] = "-1"
    return rows


def _zero_velocity(rows):
    rows[0][2] = "0"
    return rows


def _shape_and_spread(shape: str, spread_cmp1: str | None = None, extra_cols: bool = False):
    """The clean campaign with ``[beam] velocity_distribution = shape``; cmp-1's spread cells
    replaced by ``spread_cmp1``; with ``extra_cols`` a spread error and a measured visibility
    (constant 0.3 ± 0.005, far below the model at the largest |V| of cmp-2 @ 300 K)."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        edit(camp, "[data]", f'[beam]\nvelocity_distribution = "{shape}"\n\n[data]')
        p = camp.parent / "shifts.csv"
        with p.open(newline="", encoding="utf-8") as h:
            rows = list(csv.reader(h))
        head = rows[0]
        isp, iv = head.index("velocity_spread_m_s"), head.index("voltage_V")
        if extra_cols:
            head += ["velocity_spread_err_m_s", "visibility", "visibility_err"]
        vmax = max(abs(float(r[iv])) for r in rows[1:] if r[0] == "cmp-2")
        for r in rows[1:]:
            if spread_cmp1 is not None and r[0] == "cmp-1":
                r[isp] = spread_cmp1
            if extra_cols:
                low = r[0] == "cmp-2" and r[1] == "300" and abs(float(r[iv])) == vmax
                r += ["1.5", "0.1" if low else "0.3", "0.005"]
        with p.open("w", newline="", encoding="utf-8") as h:
            csv.writer(h, lineterminator="\n").writerows(rows)
        return _analyze(folder, camp)

    return build


def _spread_err_and_visibility(folder: Path) -> None:
    props = _props(folder)
    assert props["cmp-2"]["status"] == "warning", props["cmp-2"]
    msg = props["cmp-2"]["message"]
    assert "cmp-2 @ 300 K: the measured visibility departs from the velocity model's phasor " in msg
    assert "measured 0.100 ± 0.005, model" in msg  # the point far below the model, named
    doc = json.loads((folder / "out" / "results.json").read_text(encoding="utf-8"))
    for c in doc["compounds"]:
        assert any(k.startswith("velocity spread: ") for k in c["alpha_budget"]), c["alpha_budget"]


def _accel_ok(folder: Path) -> None:
    doc = json.loads((folder / "out" / "results.json").read_text(encoding="utf-8"))
    for c in doc["compounds"]:
        assert "instrument: background_acceleration" in c["alpha_budget"], c["alpha_budget"]


CASES = [
    Case("velocity tables", _with_tables(), 0, None, _tables_used),
    Case(
        "table with a negative weight",
        _with_tables(_at("cmp-1", "450", _negative)),
        1,
        None,
        _fails_first(
            "velocities.csv: series cmp-1 @ 450 K: the table is not a velocity distribution: "
            "expected weights >= 0, found -1"
        ),
    ),
    Case(
        "table with a single velocity",
        _with_tables(_at("cmp-1", "300", lambda rows: rows[:1])),
        1,
        None,
        _fails_first(
            "velocities.csv: series cmp-1 @ 300 K: the table is not a velocity distribution: "
            "expected at least two different velocities, found 1"
        ),
    ),
    Case(
        "table with a velocity of zero",
        _with_tables(_at("cmp-1", "600", _zero_velocity)),
        1,
        None,
        _fails_first(
            "velocities.csv: series cmp-1 @ 600 K: the table is not a velocity distribution: "
            "expected velocities > 0 m/s, found 0"
        ),
    ),
    Case(
        "series with neither table nor mean",
        _with_tables(_at("cmp-1", "600", lambda rows: [])),
        1,
        None,
        _fails_first(
            "shifts.csv: series cmp-1 @ 600 K expected velocity_m_s and velocity_spread_m_s (or "
            "its rows in velocities.csv), found empty cells and no table"
        ),
    ),
    Case(
        "table for a series that does not exist",
        _with_tables(lambda rows: rows + _gaussian_rows("cmp-1", "700", 180.0, 14.0), blank=False),
        1,
        None,
        _fails_first(
            "velocities.csv: series cmp-1 @ 700 K has a table but no series in shifts.csv; "
            "expected a series of cmp-1 at temperature_K 700, found 300 K, 450 K, 600 K"
        ),
    ),
    Case(
        "supersonic spread beyond the effusive limit",
        _shape_and_spread("supersonic", "80"),
        1,
        None,
        _fails_first(
            "shifts.csv: series cmp-1 @ 300 K, column 'velocity_spread_m_s' ([beam] "
            "velocity_distribution = 'supersonic'): expected a supersonic spread below 0.3630 × "
            "the mean (the effusive limit), found 0.4444 × the mean"
        ),
    ),
    Case(
        "spread error and measured visibility",
        _shape_and_spread("supersonic", extra_cols=True),
        0,
        None,
        _spread_err_and_visibility,
    ),
    Case(
        "unknown velocity distribution",
        _toml("[data]", '[beam]\nvelocity_distribution = "thermal"\n\n[data]'),
        2,
        r"campaign\.toml \[beam\] velocity_distribution: expected one of gaussian, supersonic, "
        r"effusive, found 'thermal'$",
        _no_outputs,
    ),
    Case(
        "background acceleration in metres",
        _toml('layout = "talbot-lau"', 'layout = "talbot-lau"\nbackground_acceleration = "0.02 m"'),
        2,
        r"campaign\.toml \[instrument\] background_acceleration: ",
        _no_outputs,
    ),
    Case(
        "background acceleration",
        _toml(
            'layout = "talbot-lau"',
            'layout = "talbot-lau"\nbackground_acceleration = "0.02 ± 0.002 m/s^2"',
        ),
        0,
        None,
        _accel_ok,
    ),
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_catalogue_velocity(case, tmp_path):
    run_case(case, tmp_path)
