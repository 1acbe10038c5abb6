"""Batches: the same bytes whatever the route, failure isolation, interruption and resume.

These are software checks of the batch machinery (routes, records, resume); the physics they
carry is checked elsewhere.  The reference for every "same result" below is the project's
in-process pipeline, and for correlations the :mod:`uncertainties` package's own propagation.
"""

from __future__ import annotations

import json
import os
import shutil
import signal
import subprocess
import sys
import time
import urllib.error
import urllib.request
from pathlib import Path

import numpy as np
import pytest
from uncertainties import correlation_matrix, covariance_matrix

from polarbeam.batch.run import (
    ProgressEvent,
    decode_compound,
    discover_campaigns,
    encode_compound,
    run_batch,
)
from polarbeam.errors import InputError
from polarbeam.pipeline.analysis import analyze
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

OUTPUTS = ("series.csv", "properties.csv", "results.json", "report.md", "report.html")
TEMPS = (300.0, 450.0, 600.0)


def _campaign(path, n=5, seed=11):
    comps = [
        CompoundTruth(f"mol-{i}", 100.0 + 40 * i, 15.0 + 5 * i, 0.8 * i, TEMPS) for i in range(n)
    ]
    simulate_campaign(path, comps, spec=InstrumentSpec.talbot_lau(), seed=seed, n_voltages=6)
    return path / "campaign.toml"


def _files(folder):
    out = {name: (folder / name).read_bytes() for name in OUTPUTS}
    for f in sorted((folder / "compounds").glob("*.json")):
        out[f"compounds/{f.name}"] = f.read_bytes()
    return out


@pytest.fixture(scope="module")
def camp(tmp_path_factory):
    return _campaign(tmp_path_factory.mktemp("camp"))


@pytest.fixture(scope="module")
def inline_run(camp, tmp_path_factory):
    out = tmp_path_factory.mktemp("inline")
    outcome = run_batch(camp, out, jobs=1, report_details=1)
    return out, outcome


def test_inline_batch_equals_the_pipeline(camp, inline_run):
    out, outcome = inline_run
    assert outcome.exit_code == 0
    ref = analyze(camp)
    (run,) = outcome.runs
    got = run.result
    assert [c.compound for c in got.compounds] == [c.compound for c in ref.compounds]
    assert got.summary() == ref.summary()
    # the record keeps the campaign-wide inputs shared: compounds stay correlated as in-process
    a_ref = [c.alpha for c in ref.compounds]
    a_got = [c.alpha for c in got.compounds]
    np.testing.assert_allclose(correlation_matrix(a_got), correlation_matrix(a_ref), rtol=1e-12)
    assert correlation_matrix(a_got)[0, 1] > 0.01  # shared field factor and geometry
    state = json.loads((out / "batch-state.json").read_text())
    assert state["complete"] is True


def test_record_round_trip_is_exact(camp):
    ref = analyze(camp)
    for c in ref.compounds:
        rec = json.loads(json.dumps(encode_compound(c)))  # through JSON text
        back = decode_compound(rec)
        assert back.summary() == c.summary()
        cov_a = covariance_matrix([c.alpha, c.mu2, *(s.alpha_eff for s in c.series)])
        cov_b = covariance_matrix([back.alpha, back.mu2, *(s.alpha_eff for s in back.series)])
        # summed in another order by uncertainties: equal to the last bits only
        np.testing.assert_allclose(np.asarray(cov_b), np.asarray(cov_a), rtol=1e-13, atol=0)


def test_processes_and_dask_give_the_same_bytes(camp, inline_run, tmp_path):
    pytest.importorskip("distributed", reason="needs dask[distributed] (extra polarbeam[batch])")
    ref = _files(inline_run[0])
    o2 = tmp_path / "jobs2"
    assert run_batch(camp, o2, jobs=2, report_details=1).exit_code == 0
    assert _files(o2) == ref
    od = tmp_path / "dask"
    seen = []

    def look(runner):
        info = runner.client.scheduler_info()
        http = runner.cluster.scheduler.http_server.address
        worker_http = runner.client.run(lambda dask_worker: dask_worker.http_server.address)
        port = runner.cluster.scheduler.http_server.port
        codes = {}
        for route in ("health", "status"):
            try:
                with urllib.request.urlopen(f"http://127.0.0.1:{port}/{route}", timeout=10) as r:
                    codes[route] = r.status
            except urllib.error.HTTPError as exc:
                codes[route] = exc.code
        seen.append((info["address"], list(info["workers"]), http, worker_http, codes))

    outcome = run_batch(camp, od, jobs=2, scheduler="local", report_details=1, on_runner=look)
    assert outcome.exit_code == 0
    assert _files(od) == ref
    # the local cluster listens on the loopback interface only, and serves no dashboard
    ((scheduler, workers, http, worker_http, codes),) = seen
    assert scheduler.startswith("tcp://127.0.0.1:")
    assert len(workers) == 2 and all(w.startswith("tcp://127.0.0.1:") for w in workers)
    assert http == "127.0.0.1" and set(worker_http.values()) == {"127.0.0.1"}
    assert codes == {"health": 200, "status": 404}  # Dask's health route, but no dashboard


def test_corrupt_compound_does_not_stop_the_others(tmp_path, monkeypatch):
    camp = _campaign(tmp_path / "c", n=4)
    shifts = camp.parent / "shifts.csv"
    lines = shifts.read_text().splitlines()
    i = next(k for k, ln in enumerate(lines) if ln.startswith("mol-2,"))
    cells = lines[i].split(",")
    cells[7] = "not-a-number"
    lines[i] = ",".join(cells)
    shifts.write_text("\n".join(lines) + "\n")
    # and one compound whose analysis raises an unexpected error
    import polarbeam.batch.run as pipeline  # the batch's own reference to the function

    real = pipeline.analyze_compound

    def flaky(cd, c, ctx):
        if cd.name == "mol-3":
            raise RuntimeError("solver exploded\nsecond line")
        return real(cd, c, ctx)

    monkeypatch.setattr(pipeline, "analyze_compound", flaky)
    outcome = run_batch(camp, tmp_path / "out", html=False)
    status = {c.compound: c for c in outcome.runs[0].result.compounds}
    assert status["mol-2"].status == "failed"
    assert "not-a-number" in status["mol-2"].message
    assert status["mol-3"].status == "failed"
    assert status["mol-3"].message == (
        "compound 'mol-3': unexpected error (RuntimeError: solver exploded second line)"
    )
    assert {status["mol-0"].status, status["mol-1"].status} <= {"ok", "warning"}
    assert outcome.exit_code == 1


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
    assert _files(out) == _files(inline_run[0])


def test_resume_reanalyses_only_changed_compounds(tmp_path):
    camp = _campaign(tmp_path / "c", n=3)
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


def test_several_campaigns_and_a_broken_one(tmp_path):
    root = tmp_path / "lib"
    _campaign(root / "alpha", n=2)
    _campaign(root / "beta", n=2, seed=3)
    (root / "gamma").mkdir()
    (root / "gamma" / "campaign.toml").write_text("[campaign]\ntitle = 'no instrument'\n")
    out = tmp_path / "out"
    outcome = run_batch(root, out, html=False)
    assert [r.name for r in outcome.runs] == ["alpha", "beta", "gamma"]
    assert (out / "alpha" / "properties.csv").is_file()
    assert (out / "beta" / "properties.csv").is_file()
    assert outcome.runs[2].result is None and "layout" in outcome.runs[2].error
    assert outcome.exit_code == 1
    index = (out / "campaigns.csv").read_text().splitlines()
    assert index[0].startswith("campaign,source,folder,compounds")
    assert len(index) == 4


def test_discovery_names_and_clashes(tmp_path):
    a = _campaign(tmp_path / "a" / "same", n=1)
    b = tmp_path / "b" / "same"
    shutil.copytree(a.parent, b)
    with pytest.raises(InputError, match="same subfolder 'same'"):
        discover_campaigns([a, b / "campaign.toml"])
    with pytest.raises(InputError, match="not found"):
        discover_campaigns([tmp_path / "missing.toml"])
    single = tmp_path / "single.toml"
    shutil.copy(a, single)
    assert discover_campaigns([single]) == [("single", single)]


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
    assert _files(out) == _files(inline_run[0])
