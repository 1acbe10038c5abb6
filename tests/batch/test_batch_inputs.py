"""Batch inputs: several campaigns, a broken one, discovery and name clashes.

These are software checks of the batch machinery (routes, records, resume); the physics they
carry is checked elsewhere.  The reference for every "same result" below is the project's
in-process pipeline, and for correlations the :mod:`uncertainties` package's own propagation.
"""

from __future__ import annotations

import shutil

import pytest
from _batch_helpers import make_campaign

from polarbeam.batch import discover_campaigns, run_batch
from polarbeam.errors import InputError


def test_several_campaigns_and_a_broken_one(tmp_path):
    root = tmp_path / "lib"
    make_campaign(root / "alpha", n=2)
    make_campaign(root / "beta", n=2, seed=3)
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
    a = make_campaign(tmp_path / "a" / "same", n=1)
    b = tmp_path / "b" / "same"
    shutil.copytree(a.parent, b)
    with pytest.raises(InputError, match="same subfolder 'same'"):
        discover_campaigns([a, b / "campaign.toml"])
    with pytest.raises(InputError, match="not found"):
        discover_campaigns([tmp_path / "missing.toml"])
    single = tmp_path / "single.toml"
    shutil.copy(a, single)
    assert discover_campaigns([single]) == [("single", single)]
