"""Figures are drawn once per content: the same inputs are read back from figures/, not redrawn."""

from __future__ import annotations

import dataclasses
import re

import pytest

from polarbeam._util.optional import missing_reason
from polarbeam.pipeline.analysis import analyze
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

pytest.importorskip("matplotlib", reason=missing_reason("matplotlib"))

from polarbeam.report import html as html_report
from polarbeam.report.figure_cache import KEY_SUFFIX, content_key
from polarbeam.report.html import write_html

_DATE = re.compile(r"date \(UTC\) [0-9T:+-]+")


@pytest.fixture(scope="module")
def result(tmp_path_factory):
    d = tmp_path_factory.mktemp("camp")
    comps = [
        CompoundTruth("cache-a", 150.0, 25.0, 2.0, (300.0, 450.0, 600.0)),
        CompoundTruth("cache-b", 210.0, 40.0, 0.0, (300.0, 450.0)),
    ]
    simulate_campaign(d, comps, spec=InstrumentSpec.talbot_lau(), seed=11, n_voltages=6)
    return analyze(d / "campaign.toml")


def _counting(monkeypatch):
    drawn = []
    original = html_report.compound_figure_files

    def counted(c, *args, **kwargs):
        drawn.append(c.compound)
        return original(c, *args, **kwargs)

    monkeypatch.setattr(html_report, "compound_figure_files", counted)
    return drawn


def test_key_follows_the_content(result):
    a, b = result.compounds
    assert content_key("compound_figures", a) == content_key("compound_figures", a)
    assert content_key("compound_figures", a) != content_key("compound_figures", b)
    changed = dataclasses.replace(a, extra={**a.extra, "alpha_additive_A3": 24.0})
    assert content_key("compound_figures", changed) != content_key("compound_figures", a)
    assert content_key("series_figure", a) != content_key("compound_figures", a)


def test_unchanged_figures_are_read_back_and_changed_ones_redrawn(result, tmp_path, monkeypatch):
    drawn = _counting(monkeypatch)
    write_html(result, tmp_path)
    first = (tmp_path / "report.html").read_text(encoding="utf-8")
    assert drawn == ["cache-a", "cache-b"]
    keys = sorted(p.name for p in (tmp_path / "figures").glob(f"*{KEY_SUFFIX}"))
    assert len(keys) == 2  # one per compound (no parity figure without computed values)
    pngs = {p.name: p.read_bytes() for p in (tmp_path / "figures").glob("*.png")}

    drawn.clear()
    write_html(result, tmp_path)
    second = (tmp_path / "report.html").read_text(encoding="utf-8")
    assert drawn == []  # nothing redrawn
    assert _DATE.sub("", second) == _DATE.sub("", first)
    assert {p.name: p.read_bytes() for p in (tmp_path / "figures").glob("*.png")} == pngs

    a, b = result.compounds
    b2 = dataclasses.replace(b, extra={**b.extra, "alpha_computed_A3": 38.5})
    drawn.clear()
    write_html(dataclasses.replace(result, compounds=(a, b2)), tmp_path)
    assert drawn == ["cache-b"]  # only the compound whose inputs changed


def test_a_missing_file_means_a_fresh_drawing(result, tmp_path, monkeypatch):
    drawn = _counting(monkeypatch)
    write_html(result, tmp_path)
    next((tmp_path / "figures").glob("cache-a*-series.png")).unlink()
    drawn.clear()
    write_html(result, tmp_path)
    assert drawn == ["cache-a"]
    assert next((tmp_path / "figures").glob("cache-a*-series.png")).stat().st_size > 0


def test_pdf_on_request(result, tmp_path, monkeypatch):
    """``pdf=True`` (``analyze --pdf``) adds a PDF of every figure; without it none is written;
    a cached figure whose PDF is missing is drawn again."""
    drawn = _counting(monkeypatch)
    write_html(result, tmp_path)
    assert not list((tmp_path / "figures").glob("*.pdf"))
    drawn.clear()
    write_html(result, tmp_path, pdf=True)
    assert drawn == ["cache-a", "cache-b"]  # the SVG/PNG were cached, the PDFs were not there
    svgs = {p.stem for p in (tmp_path / "figures").glob("*.svg")}
    pdfs = {p.stem for p in (tmp_path / "figures").glob("*.pdf")}
    assert pdfs == svgs and pdfs
    for p in (tmp_path / "figures").glob("*.pdf"):
        assert p.read_bytes()[:5] == b"%PDF-"
    drawn.clear()
    write_html(result, tmp_path, pdf=True)
    assert drawn == []  # PDFs present and inputs unchanged: nothing redrawn


def test_analyze_pdf_option_writes_pdfs(tmp_path):
    from typer.testing import CliRunner

    from polarbeam.cli.commands import app

    comps = [CompoundTruth("pdf-a", 150.0, 25.0, 2.0, (300.0, 600.0))]
    simulate_campaign(tmp_path / "c", comps, spec=InstrumentSpec.talbot_lau(), seed=5)
    camp = str(tmp_path / "c" / "campaign.toml")
    runner = CliRunner()
    r = runner.invoke(app, ["analyze", camp, "--out", str(tmp_path / "plain"), "--quiet"])
    assert r.exit_code == 0, r.output
    assert not list((tmp_path / "plain" / "figures").glob("*.pdf"))
    r = runner.invoke(app, ["analyze", camp, "--out", str(tmp_path / "o"), "--quiet", "--pdf"])
    assert r.exit_code == 0, r.output
    pdfs = sorted(p.name for p in (tmp_path / "o" / "figures").glob("*.pdf"))
    svgs = sorted(p.name for p in (tmp_path / "o" / "figures").glob("*.svg"))
    assert pdfs and [p[:-4] for p in pdfs] == [s[:-4] for s in svgs]
