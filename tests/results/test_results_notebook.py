"""Result objects in a notebook: values in the units people read, short reprs, tables, and the
α–⟨μ²⟩ correlation (checked against a closed form)."""

from __future__ import annotations

from pathlib import Path

import pytest
from uncertainties import ufloat

from polarbeam.pipeline.analysis import analyze
from polarbeam.results.objects import correlation

DEMO = Path(__file__).resolve().parents[2] / "examples" / "demo" / "campaign.toml"


@pytest.fixture(scope="module")
def demo():
    return analyze(DEMO)


def test_properties_in_reading_units_match_the_table(demo):
    for c in demo.compounds:
        row = c.row()
        for key in ("alpha_A3", "alpha_err_A3", "dipole_D", "dipole_err_D", "dipole_upper_D"):
            assert getattr(c, key) == row[key]
        assert c.dipole_lo_D == row["dipole_lo_D"] and c.dipole_hi_D == row["dipole_hi_D"]


def test_reprs_are_short_and_say_the_result(demo):
    assert len(repr(demo)) < 300
    for c in demo.compounds:
        text = repr(c)
        assert len(text) < 200 and c.compound in text
        for s in c.series:
            assert len(repr(s)) < 200
    polar = next(c for c in demo.compounds if c.dipole_D is not None)
    assert "μ = " in repr(polar) and "Å³" in repr(polar)


def test_tables_and_html(demo):
    assert demo.to_dataframe().equals(demo.properties)
    c = demo.compounds[0]
    df = c.to_dataframe()
    assert len(df) == len(c.series) and "alpha_eff_A3" in df.columns
    page = c._repr_html_()
    assert c.compound in page and "<table>" in page and "corr(α, ⟨μ²⟩)" in page


def test_correlation_against_closed_form():
    # x = u + v, y = u − v: corr = (σu² − σv²)/(σu² + σv²) (elementary propagation)
    u, v = ufloat(1.0, 0.3), ufloat(2.0, 0.4)
    assert correlation(u + v, u - v) == pytest.approx((0.09 - 0.16) / (0.09 + 0.16), rel=1e-12)
    assert correlation(u, None) is None
    assert correlation(u, ufloat(1.0, 0.0)) is None


def test_debye_intercept_and_slope_are_anticorrelated(demo):
    # intercept and slope of a line against 1/T > 0 (common practice: a Debye plot's α and ⟨μ²⟩
    # are strongly anticorrelated); written to results.json for every separated compound
    for c in demo.compounds:
        if c.alpha is not None and c.mu2 is not None:
            assert -1.0 < c.alpha_mu2_correlation < -0.5
            assert c.summary()["alpha_mu2_correlation"] == c.alpha_mu2_correlation
