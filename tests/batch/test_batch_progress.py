"""Progress lines: the rate counts from the start of the run, like the closing line, and across
campaigns (times scripted, no clock involved)."""

from __future__ import annotations

import io
from pathlib import Path

from polarbeam.batch import progress as progress_module
from polarbeam.batch.progress import ProgressEvent, TerminalProgress
from polarbeam.batch.state import result_compounds
from polarbeam.pipeline.analysis import analyze


def test_rate_counts_from_the_start_of_the_run(monkeypatch):
    clock = iter([0.0, 10.0, 12.0, 14.0, 16.0, 20.0])
    monkeypatch.setattr(progress_module.time, "perf_counter", lambda: next(clock))
    out = io.StringIO()
    bar = TerminalProgress(out, plain=True, every_s=0.0)  # started at t = 0
    bar(ProgressEvent("a", 0, 2))  # t = 10: loading took 10 s
    bar(ProgressEvent("a", 1, 2, "x", "ok"))  # t = 12
    bar(ProgressEvent("a", 2, 2, "y", "ok"))  # t = 14: 2 compounds in 14 s
    bar(ProgressEvent("b", 0, 2))  # t = 16
    bar(ProgressEvent("b", 2, 2, "z", "ok"))  # t = 20: 4 compounds in 20 s
    lines = out.getvalue().splitlines()
    assert lines[2] == "a: 2/2 compounds (0.1/s)"  # 2 / 14 s, as "2 compound(s) in 14 s" says
    assert lines[-1] == "b: 2/2 compounds (0.2/s)"  # 4 / 20 s over the whole run


def test_recoil_and_visibility_compounds_are_counted():
    root = Path(__file__).resolve().parents[2] / "examples"
    recoil = analyze(root / "recoil" / "campaign.toml")
    assert not recoil.compounds and result_compounds(recoil) == ["chromo-A", "chromo-B"]
    optical = analyze(root / "visibility" / "campaign.toml")
    assert len(result_compounds(optical)) == len(optical.optical.compounds) >= 1
