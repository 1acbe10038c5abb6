"""Fixtures of the batch tests: one simulated campaign and its in-process batch run, shared by
every batch test file."""

from __future__ import annotations

import pytest
from _batch_helpers import make_campaign

from polarbeam.batch import run_batch


@pytest.fixture(scope="package")
def camp(tmp_path_factory):
    return make_campaign(tmp_path_factory.mktemp("camp"))


@pytest.fixture(scope="package")
def inline_run(camp, tmp_path_factory):
    out = tmp_path_factory.mktemp("inline")
    outcome = run_batch(camp, out, jobs=1, report_details=1)
    return out, outcome
