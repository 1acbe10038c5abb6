"""Profile compounds in the report: the profile figure (measured steps, model lines, residuals,
compound in the title), the series.csv rows per voltage and the Markdown table."""

from __future__ import annotations

import numpy as np
import pytest

from polarbeam._util.optional import missing_reason
from polarbeam.report.files import profile_markdown_lines
from polarbeam.results.objects import CampaignResult, CompoundResult
from polarbeam.results.profiles import ProfileRecord

X = np.linspace(-1e-3, 1e-3, 150)


def _record(volt: float, shift: float) -> ProfileRecord:
    model = 2.0 + 1e3 * np.exp(-0.5 * ((X - shift) / 1e-4) ** 2)
    return ProfileRecord(
        "PR-$1", 300.0, volt, X, np.round(model), model, 2.0, shift, 1e-6, 1e-4, 2e-6, shift,
        1e-4, 8.0, 0.3, 600.0, 30.0, 0.9,
    )  # fmt: skip


def _compound() -> CompoundResult:
    recs = (_record(0.0, 0.0), _record(1e4, 3e-5), _record(2e4, 1.2e-4))
    return CompoundResult("PR-$1", "ok", "ok", profiles=recs, method="profile fit")


def test_series_rows_one_per_profile():
    camp = CampaignResult("t", "s", "beam-profile", "uniform", (_compound(),))
    df = camp.series
    assert list(df["voltage_V"]) == [0.0, 1e4, 2e4]
    assert {"centroid_m", "centroid_err_m", "width_m", "width_err_m", "ld_ratio"} <= set(df)
    lines = profile_markdown_lines(_compound())
    assert len([ln for ln in lines if ln.startswith("| 300 |")]) == 3


def test_profile_figure():
    pytest.importorskip("matplotlib", reason=missing_reason("matplotlib"))
    from polarbeam.report import figures

    fig = figures.profile_figure(_compound())
    assert "PR-\\$1" in fig.axes[0].get_title()  # the compound, '$' kept out of mathtext
    models = [ln for ln in fig.axes[0].get_lines() if ln.get_gid() == "model"]
    assert len(models) == 3 and all(len(ln.get_xdata()) >= 100 for ln in models)
    assert fig.axes[1].get_ylabel() == "(n − m)/√m"
