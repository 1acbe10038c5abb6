"""The Debye figure shows the structure prediction α_add + ⟨μ²⟩(T)/3kT beside the measured slope."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from polarbeam._util.optional import missing_reason
from polarbeam.pipeline.analysis import analyze
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

pytest.importorskip("matplotlib", reason=missing_reason("matplotlib"))

from polarbeam.report import figures


@pytest.fixture(scope="module")
def compound(tmp_path_factory):
    d = tmp_path_factory.mktemp("camp")
    comps = [CompoundTruth("polar-a", 150.0, 25.0, 2.0, (300.0, 450.0, 600.0))]
    simulate_campaign(d, comps, spec=InstrumentSpec.talbot_lau(), seed=5, n_voltages=7)
    return analyze(d / "campaign.toml").compounds[0]


def test_prediction_drawn_at_the_measured_temperatures(compound):
    preds = [30.0 + 1000.0 / s.temperature_K for s in compound.series]
    series = tuple(
        dataclasses.replace(
            s, extra={**s.extra, "alpha_eff_pred_A3": p, "alpha_eff_pred_err_A3": 1.0}
        )
        for s, p in zip(compound.series, preds, strict=True)
    )
    fig = figures.debye_figure(dataclasses.replace(compound, series=series))
    ax = fig.axes[0]
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any(t.startswith("structure prediction") for t in labels)
    drawn = [ln for ln in ax.get_lines() if ln.get_linestyle() == "--"]
    assert len(drawn) == 1
    x, y = drawn[0].get_data()
    order = np.argsort([1.0 / s.temperature_K for s in compound.series])
    assert np.allclose(y, np.asarray(preds)[order])
    assert np.allclose(x, 1e3 / np.array([s.temperature_K for s in compound.series])[order])


def test_no_prediction_no_extra_line(compound):
    fig = figures.debye_figure(compound)
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert not any(t.startswith("structure prediction") for t in labels)
