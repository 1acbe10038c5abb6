"""Catalogue cases of issue 17 (time of flight): ``[data] time_of_flight`` traces with ``[beam]``
flight_length, gate and time_offset.

A bad trace (negative or fractional counts, no counts, bins of unequal width, a gate longer than
the flight time, a trace for a series that does not exist) fails only its compound, with one line
naming the file, the compound, the temperature and what was expected; a bad ``[beam]`` key stops
the run with one line.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np
import pytest
from _harness import Case, edit, run_case, small_campaign

from polarbeam.beam.time_of_flight import FluxShape, TraceSetup
from polarbeam.simulation.time_of_flight import simulate_trace, traces_csv, write_traces

WIDTH = 20e-6
STARTS = np.arange(4.4e-3, 10.4e-3, WIDTH)
TEMPS = (300.0, 450.0, 600.0)


def _analyze(folder: Path, camp: Path) -> list[str]:
    return ["analyze", str(camp), "--out", str(folder / "out"), "--quiet"]


def _traces(gate=20e-6, fast: str | None = None, seed: int = 5):
    """One trace per series of the clean campaign (the beam of ``small_campaign``: ≈ 180 m/s;
    ``fast``: that compound's beam at 700 m/s, its traces starting at 0)."""
    rng = np.random.default_rng(seed)
    setup = TraceSetup(1.25, gate, 0.0)
    out = []
    for name in ("cmp-1", "cmp-2"):
        for t in TEMPS:
            if name == fast:
                shape, starts = FluxShape(700.0, 60.0), np.arange(0.0, 5e-3, WIDTH)
            else:
                shape, starts = FluxShape(176.0, 20.0), STARTS
            out.append(simulate_trace(name, t, shape, setup, starts, WIDTH, rng, total=1e4))
    return out


def _with_traces(change=None, gate=20e-6, fast=None, beam=True):
    """The clean campaign with traces; ``change(rows)`` edits the tof.csv rows (header first)."""

    def build(folder: Path) -> list[str]:
        camp = small_campaign(folder)
        traces = _traces(gate, fast)
        path = write_traces(camp, traces, length=1.25, length_err=0.002, gate=gate, offset_err=2e-6)
        if change is not None:
            rows = [r.split(",") for r in traces_csv(traces).splitlines()]
            rows = change(rows)
            path.write_text("\n".join(",".join(r) for r in rows) + "\n", encoding="utf-8")
        if not beam:
            text = camp.read_text(encoding="utf-8")
            camp.write_text(text[: text.index("\n[beam]")] + "\n", encoding="utf-8")
        return _analyze(folder, camp)

    return build


def _props(folder: Path) -> dict[str, dict[str, str]]:
    with (folder / "out" / "properties.csv").open(newline="", encoding="utf-8") as h:
        return {r["compound"]: r for r in csv.DictReader(h)}


def _fails(name: str, pattern: str):
    def check(folder: Path) -> None:
        props = _props(folder)
        assert props[name]["status"] == "failed", props[name]
        assert pattern in props[name]["message"], props[name]["message"]
        others = [r for n, r in props.items() if n != name]
        assert others and all(r["status"] != "failed" for r in others), props
        assert (folder / "out" / "velocities.csv").is_file()  # the others' tables are written

    return check


def _clean(folder: Path) -> None:
    props = _props(folder)
    assert all(r["status"] != "failed" for r in props.values()), props
    with (folder / "out" / "velocities.csv").open(newline="", encoding="utf-8") as h:
        rows = list(csv.DictReader(h))
    assert list(rows[0]) == ["compound", "temperature_K", "velocity_m_s", "weight"]
    assert {(r["compound"], float(r["temperature_K"])) for r in rows} == {
        (n, t) for n in ("cmp-1", "cmp-2") for t in TEMPS
    }
    figs = list((folder / "out" / "figures").glob("*time_of_flight.svg"))
    assert len(figs) == (2 if figs else 0)  # one per compound when matplotlib is installed


def _no_outputs(folder: Path) -> None:
    assert not (folder / "out" / "properties.csv").exists()


def _set(name, temp, k, col, value):
    """Rows with the k-th row of series (name, temp) given ``value`` in column ``col``."""

    def change(rows):
        idx = rows[0].index(col)
        hits = [r for r in rows[1:] if r[0] == name and float(r[1]) == temp]
        hits[k][idx] = value
        return rows

    return change


def _zero(name, temp):
    def change(rows):
        for r in rows[1:]:
            if r[0] == name and float(r[1]) == temp:
                r[3] = "0"
        return rows

    return change


def _drop(name, temp, k):
    def change(rows):
        hits = [i for i, r in enumerate(rows) if i and r[0] == name and float(r[1]) == temp]
        del rows[hits[k]]
        return rows

    return change


def _retemp(name, temp, new):
    def change(rows):
        for r in rows[1:]:
            if r[0] == name and float(r[1]) == temp:
                r[1] = new
        return rows

    return change


def _beam_edit(old: str, new: str):
    def build(folder: Path) -> list[str]:
        args = _with_traces()(folder)
        edit(Path(args[1]), old, new)
        return args

    return build


CASES = [
    Case("traces for every series", _with_traces(), 0, None, _clean),
    Case(
        "negative counts",
        _with_traces(_set("cmp-1", 450.0, 40, "counts", "-3")),
        1,
        None,
        _fails(
            "cmp-1",
            "series cmp-1 @ 450 K, column 'counts' expected a whole number of counts >= 0, "
            "found '-3'",
        ),
    ),
    Case(
        "fractional counts",
        _with_traces(_set("cmp-2", 300.0, 7, "counts", "2.5")),
        1,
        None,
        _fails("cmp-2", "expected a whole number of counts >= 0, found '2.5'"),
    ),
    Case(
        "trace with no counts",
        _with_traces(_zero("cmp-1", 600.0)),
        1,
        None,
        _fails(
            "cmp-1",
            "tof.csv: series cmp-1 @ 600 K: expected a trace with counts, found no counts in its "
            "300 bins",
        ),
    ),
    Case(
        "bins of unequal width",
        _with_traces(_drop("cmp-2", 450.0, 100)),
        1,
        None,
        _fails("cmp-2", "tof.csv: series cmp-2 @ 450 K: expected bins of equal width (time_s "),
    ),
    Case(
        "gate longer than the flight time",
        _with_traces(gate=2e-3, fast="cmp-1"),
        1,
        None,
        _fails(
            "cmp-1",
            "tof.csv: series cmp-1 @ 300 K: [beam] gate 2000 us expected shorter than the "
            "flight time, found a flight time of",
        ),
    ),
    Case(
        "trace for a temperature without a series",
        _with_traces(_retemp("cmp-2", 600.0, "610")),
        1,
        None,
        _fails(
            "cmp-2",
            "tof.csv: series cmp-2 @ 610 K has a trace but no series in shifts.csv; expected a "
            "series of cmp-2 at temperature_K 610, found 300 K, 450 K, 600 K",
        ),
    ),
    Case(
        "trace for a compound without series",
        _with_traces(
            lambda rows: rows + [["cmp-9", "300", f"{i * 1e-5:.9g}", "3"] for i in range(9)]
        ),
        1,
        None,
        _fails(
            "cmp-9",
            "tof.csv: series cmp-9 @ 300 K has a trace but no series in shifts.csv; expected a "
            "series of cmp-9 at temperature_K 300, found none",
        ),
    ),
    Case(
        "gate missing",
        _beam_edit('gate = "20 us"\n', ""),
        2,
        r"campaign\.toml \[beam\] gate: required with \[data\] time_of_flight",
        _no_outputs,
    ),
    Case(
        "gate in metres",
        _beam_edit('gate = "20 us"', 'gate = "20 m"'),
        2,
        r"campaign\.toml \[beam\] gate: ",
        _no_outputs,
    ),
    Case(
        "traces without [beam]",
        _with_traces(beam=False),
        2,
        r"campaign\.toml \[beam\] flight_length: required with \[data\] time_of_flight",
        _no_outputs,
    ),
    Case(
        "flight length without traces",
        _beam_edit('time_of_flight = "tof.csv"\n', ""),
        2,
        r"campaign\.toml \[beam\] flight_length, gate, time_offset: used only with \[data\] "
        r"time_of_flight",
        _no_outputs,
    ),
]


@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_catalogue_tof(case, tmp_path):
    run_case(case, tmp_path)
