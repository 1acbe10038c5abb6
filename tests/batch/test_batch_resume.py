"""Batch interruption and resume: finished work is kept, and only what is missing or changed
is analysed again.

These are software checks of the batch machinery (routes, records, resume); the physics they
carry is checked elsewhere.  The reference for every "same result" below is the project's
in-process pipeline, and for correlations the :mod:`uncertainties` package's own propagation.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest
from _batch_helpers import make_campaign, output_files

from polarbeam.batch import ProgressEvent, run_batch


class _Stop:
    def __init__(self, after):
        self.after, self.seen = after, 0

    def __call__(self, ev: ProgressEvent):
        if ev.compound is not None:
            self.seen += 1
            if self.seen == self.after:
                raise KeyboardInterrupt


def test_interrupted_and_resumed_equals_uninterrupted(camp, inline_run, tmp_path):
    out = tmp_path / "out"
    with pytest.raises(KeyboardInterrupt):
        run_batch(camp, out, progress=_Stop(2), report_details=1)
    state = json.loads((out / "batch-state.json").read_text())
    assert state["complete"] is False and state["compounds_done"] == 2
    assert len(list((out / "compounds").glob("*.json"))) == 2
    assert not (out / "properties.csv").exists()
    outcome = run_batch(camp, out, resume=True, report_details=1)
    assert outcome.runs[0].reused == 2 and outcome.runs[0].analysed == 3
    assert output_files(out) == output_files(inline_run[0])


def test_resume_reanalyses_only_changed_compounds(tmp_path):
    camp = make_campaign(tmp_path / "c", n=3)
    out = tmp_path / "out"
    first = run_batch(camp, out, html=False)
    shifts = camp.parent / "shifts.csv"
    lines = shifts.read_text().splitlines()
    i = next(k for k, ln in enumerate(lines) if ln.startswith("mol-1,"))
    cells = lines[i].split(",")
    cells[7] = f"{float(cells[7]) + 0.05:.10g}"
    lines[i] = ",".join(cells)
    shifts.write_text("\n".join(lines) + "\n")
    second = run_batch(camp, out, resume=True, html=False)
    assert second.runs[0].reused == 2 and second.runs[0].analysed == 1
    a1 = [c.alpha.nominal_value for c in first.runs[0].result.compounds]
    a2 = [c.alpha.nominal_value for c in second.runs[0].result.compounds]
    assert a1[0] == a2[0] and a1[2] == a2[2] and a1[1] != a2[1]
    # an edited instrument table invalidates every compound
    toml = camp.read_text().replace('length = "0.1 ', 'length = "0.1001 ')
    assert toml != camp.read_text()
    camp.write_text(toml)
    third = run_batch(camp, out, resume=True, html=False)
    assert third.runs[0].reused == 0


_SLOW_SITE = """
import os
import time

if os.environ.get("PB_TEST_SLOW"):
    import polarbeam.pipeline.analysis as _p

    _real = _p.analyze_compound

    def _slow(*a, **k):
        time.sleep(float(os.environ["PB_TEST_SLOW"]))
        return _real(*a, **k)

    _p.analyze_compound = _slow
"""


@pytest.mark.skipif(sys.platform == "win32", reason="SIGINT to a child process is POSIX-only")
def test_ctrl_c_on_the_command_line_then_resume(camp, inline_run, tmp_path):
    """A real Ctrl-C (SIGINT) to `polarbeam analyze --jobs 2`, then `--resume`."""
    import polarbeam

    site = tmp_path / "site"
    site.mkdir()
    (site / "sitecustomize.py").write_text(_SLOW_SITE)  # slows each compound in every process
    src = Path(polarbeam.__file__).resolve().parents[1]
    env = dict(os.environ, PYTHONPATH=f"{site}{os.pathsep}{src}", PB_TEST_SLOW="0.4")
    out = tmp_path / "out"
    cmd = [sys.executable, "-m", "polarbeam", "analyze", str(camp), "-o", str(out), "-j", "2"]
    proc = subprocess.Popen(
        [*cmd, "--report-details", "1"],
        env=env,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL),
    )
    deadline = time.monotonic() + 90
    while not list((out / "compounds").glob("*.json")) and time.monotonic() < deadline:
        time.sleep(0.02)
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=90)
    assert proc.returncode == 130, err.decode()
    assert "Traceback" not in err.decode()
    assert "--resume" in err.decode()
    state = json.loads((out / "batch-state.json").read_text())
    done = state["compounds_done"]
    assert state["complete"] is False and 1 <= done < 5
    assert len(list((out / "compounds").glob("*.json"))) == done
    outcome = run_batch(camp, out, resume=True, report_details=1)
    assert outcome.runs[0].reused == done
    assert output_files(out) == output_files(inline_run[0])
