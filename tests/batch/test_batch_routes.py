"""Batch routes: the same bytes in-process, in processes and on Dask, and failure isolation.

These are software checks of the batch machinery (routes, records, resume); the physics they
carry is checked elsewhere.  The reference for every "same result" below is the project's
in-process pipeline, and for correlations the :mod:`uncertainties` package's own propagation.
"""

from __future__ import annotations

import json
import urllib.error
import urllib.request

import numpy as np
import pytest
from _batch_helpers import comparable_summary, make_campaign, output_files
from uncertainties import correlation_matrix

import polarbeam.batch.workers as workers  # the batch module that calls analyze_compound
from polarbeam._util.optional import missing_reason
from polarbeam.batch import run_batch
from polarbeam.pipeline.analysis import analyze


def test_inline_batch_equals_the_pipeline(camp, inline_run):
    out, outcome = inline_run
    assert outcome.exit_code == 0
    ref = analyze(camp)
    (run,) = outcome.runs
    got = run.result
    assert [c.compound for c in got.compounds] == [c.compound for c in ref.compounds]
    assert comparable_summary(got) == comparable_summary(ref)
    # the record keeps the campaign-wide inputs shared: compounds stay correlated as in-process
    a_ref = [c.alpha for c in ref.compounds]
    a_got = [c.alpha for c in got.compounds]
    np.testing.assert_allclose(correlation_matrix(a_got), correlation_matrix(a_ref), rtol=1e-12)
    assert correlation_matrix(a_got)[0, 1] > 0.01  # shared field factor and geometry
    state = json.loads((out / "batch-state.json").read_text())
    assert state["complete"] is True


def test_processes_and_dask_give_the_same_bytes(camp, inline_run, tmp_path):
    pytest.importorskip("distributed", reason=missing_reason("distributed"))
    ref = output_files(inline_run[0])
    o2 = tmp_path / "jobs2"
    assert run_batch(camp, o2, jobs=2, report_details=1).exit_code == 0
    assert output_files(o2) == ref
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
    assert output_files(od) == ref
    # the local cluster listens on the loopback interface only, and serves no dashboard
    ((scheduler, workers, http, worker_http, codes),) = seen
    assert scheduler.startswith("tcp://127.0.0.1:")
    assert len(workers) == 2 and all(w.startswith("tcp://127.0.0.1:") for w in workers)
    assert http == "127.0.0.1" and set(worker_http.values()) == {"127.0.0.1"}
    assert codes == {"health": 200, "status": 404}  # Dask's health route, but no dashboard


def test_corrupt_compound_does_not_stop_the_others(tmp_path, monkeypatch):
    camp = make_campaign(tmp_path / "c", n=4)
    shifts = camp.parent / "shifts.csv"
    lines = shifts.read_text().splitlines()
    i = next(k for k, ln in enumerate(lines) if ln.startswith("mol-2,"))
    cells = lines[i].split(",")
    cells[7] = "not-a-number"
    lines[i] = ",".join(cells)
    shifts.write_text("\n".join(lines) + "\n")
    # and one compound whose analysis raises an unexpected error
    real = workers.analyze_compound  # the batch's own reference to the function

    def flaky(cd, c, ctx):
        if cd.name == "mol-3":
            raise RuntimeError("solver exploded\nsecond line")
        return real(cd, c, ctx)

    monkeypatch.setattr(workers, "analyze_compound", flaky)
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
