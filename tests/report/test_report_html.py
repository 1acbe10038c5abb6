"""report.html and the figure files: escaping, self-containment, the Debye band, a real browser."""

from __future__ import annotations

import dataclasses
import html
import math
import re
import shutil
import subprocess
import xml.etree.ElementTree as ET
from pathlib import Path

import numpy as np
import pytest
from uncertainties import ufloat

from polarbeam._util.cautions import CAUTIONS
from polarbeam._util.optional import missing_reason
from polarbeam.constants import BOLTZMANN, alpha_a3_from_si
from polarbeam.pipeline.analysis import analyze
from polarbeam.simulation.campaigns import CompoundTruth, InstrumentSpec, simulate_campaign

pytest.importorskip("matplotlib", reason=missing_reason("matplotlib"))

from polarbeam.report import figures
from polarbeam.report import html as html_report
from polarbeam.report.html import render_html, write_html

EVIL = "<script>alert(1)</script>"
CHROMIUM = next(
    (
        p
        for p in ("/usr/bin/chromium", shutil.which("chromium"), shutil.which("chromium-browser"))
        if p and Path(p).exists()
    ),
    None,
)


@pytest.fixture(scope="module")
def result(tmp_path_factory):
    d = tmp_path_factory.mktemp("camp")
    comps = [
        CompoundTruth(EVIL, 150.0, 25.0, 2.0, (300.0, 450.0, 600.0)),
        CompoundTruth("plain-b", 210.0, 40.0, 0.0, (300.0, 450.0, 600.0)),
        CompoundTruth("single-c", 120.0, 12.0, 1.0, (400.0,)),
    ]
    simulate_campaign(d, comps, spec=InstrumentSpec.talbot_lau(), seed=5, n_voltages=7)
    res = analyze(d / "campaign.toml")
    # predicted values as the structure stage would store them
    evil, plain, single = res.compounds
    evil = dataclasses.replace(
        evil, extra={"alpha_additive_A3": 24.0, "alpha_additive_err_A3": 1.5}
    )
    plain = dataclasses.replace(plain, extra={"alpha_computed_A3": 38.5})
    return dataclasses.replace(res, compounds=(evil, plain, single), title="lab <b>run</b> & co")


@pytest.fixture(scope="module")
def report(result, tmp_path_factory):
    out = tmp_path_factory.mktemp("report")
    path = write_html(result, out)
    return out, path.read_text(encoding="utf-8")


def test_user_strings_are_escaped(report):
    _, text = report
    assert EVIL not in text
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    assert len(re.findall(r"<script\b", text)) == 1  # ours, at the end
    assert "<b>run</b>" not in text and "lab &lt;b&gt;run&lt;/b&gt; &amp; co" in text


def test_self_contained_and_complete(report, result):
    out, text = report
    assert not re.search(r"""(src|href)\s*=\s*["']?(https?:)?//""", text)  # nothing remote
    assert "<link" not in text
    assert text.count("<svg") >= 8  # fit, visibility, Debye, budget per compound, parity...
    for c in CAUTIONS:
        assert html.escape(c) in text
    assert 'id="summary-table"' in text
    files = sorted(p.name for p in (out / "figures").iterdir())
    assert "parity.svg" in files and "parity.png" in files
    for f in (out / "figures").glob("*.png"):
        assert f.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    for f in (out / "figures").glob("*.svg"):
        ET.fromstring(f.read_text(encoding="utf-8"))  # well-formed XML
    # the single-temperature compound has no Debye plot; the others do
    assert any(n.endswith("-debye.svg") and n.startswith("plain-b") for n in files)
    assert not any(n.startswith("single-c") and n.endswith("-debye.svg") for n in files)
    assert any(n.endswith("-comparison.svg") for n in files)


def test_output_is_deterministic(result):
    assert render_html(result, details=1) == render_html(result, details=1)


def test_debye_band_is_the_propagated_error(result):
    """The drawn band equals uncertainties' own propagation of α + ⟨μ²⟩/(3kT)."""
    c = result.compounds[1]
    x = np.array([0.0, 1 / 600, 1 / 300, 1 / 250])
    line, sd = figures._debye_band(c, x)
    for xi, li, si in zip(x, line, sd, strict=True):
        direct = c.alpha + c.mu2 * xi / (3 * BOLTZMANN)
        assert math.isclose(li, alpha_a3_from_si(direct.nominal_value), rel_tol=1e-12)
        assert math.isclose(si, alpha_a3_from_si(direct.std_dev), rel_tol=1e-9)
    # and at x = 1/T of a series the line is the Debye fit's prediction for that series
    s = c.series[0]
    pred = alpha_a3_from_si(
        c.alpha.nominal_value + c.mu2.nominal_value / (3 * BOLTZMANN * s.temperature_K)
    )
    assert abs(pred - s.alpha_eff_A3) < 4 * s.alpha_eff_err_A3


def test_visibility_is_drawn_when_recorded(result):
    c = result.compounds[1]
    s = c.series[0]
    vis = 0.4 * np.asarray(s.modulus)
    s2 = dataclasses.replace(
        s, extra={"visibility": vis, "visibility_err": np.full_like(vis, 0.01)}
    )
    c2 = dataclasses.replace(c, series=(s2, *c.series[1:]))
    fig = figures.visibility_figure(c2)
    labels = [t.get_text() for t in fig.axes[0].get_legend().get_texts()]
    assert any("measured" in t for t in labels)
    # beam-profile-like series (no contrast loss, no visibility): nothing to draw
    flat = dataclasses.replace(s, modulus=np.ones_like(s.modulus))
    assert figures.visibility_figure(dataclasses.replace(c, series=(flat,))) is None


def test_visibility_figure_uses_the_stored_normalisation(result):
    """One normalisation (the zero-field references) in the figure, results.json and series.csv:
    the drawn points are ``relative_visibility`` of the summary, the line is the stored
    ``velocity_contrast`` modulus; nothing is rescaled to the lowest-field point."""
    c = result.compounds[1]
    s = c.series[0]
    vis = 0.9 * np.asarray(s.modulus) + 0.03 * np.cos(np.arange(s.modulus.size))
    s2 = dataclasses.replace(s, visibility=vis, visibility_err=np.full_like(vis, 0.01))
    fig = figures.visibility_figure(dataclasses.replace(c, series=(s2,)))
    ax = fig.axes[0]
    order = np.argsort(s2.voltages)
    summary = s2.summary()
    line = next(ln for ln in ax.get_lines() if ln.get_linestyle() == "-")
    stored = np.asarray([p["velocity_contrast"] for p in summary["points"]])
    np.testing.assert_allclose(line.get_ydata(), stored[order], rtol=0, atol=0)
    points = next(ln for ln in ax.get_lines() if ln.get_marker() not in (None, "None", ""))
    np.testing.assert_allclose(
        points.get_ydata(), np.asarray(summary["relative_visibility"])[order], rtol=0, atol=0
    )
    vmax = np.max(np.abs(s2.voltages))
    at_max = float(np.nanmean(vis[np.abs(s2.voltages) == vmax]))
    assert s2.row()["relative_visibility_at_max_V"] == at_max
    assert s2.row()["min_velocity_contrast"] == float(np.min(line.get_ydata()))
    assert "zero-field" in ax.get_title()


def test_figures_without_values_are_left_out(result):
    c = dataclasses.replace(result.compounds[2], extra={})
    assert figures.debye_figure(c) is None
    assert figures.comparison_figure(c) is None
    bare = dataclasses.replace(result, compounds=(result.compounds[2],))
    assert figures.parity_figure(bare) is None
    # a dollar sign in a tag must not be read as mathtext
    u = ufloat(1.0, 0.1, tag="velocity: $weird @ 300 K")
    s = dataclasses.replace(c.series[0], alpha_eff=u * 1e-40)
    fig = figures.budget_figure(dataclasses.replace(c, series=(s,), alpha=None))
    figures.to_svg(fig)


def test_without_matplotlib_the_page_still_has_its_tables(result, monkeypatch):
    monkeypatch.setattr(html_report, "have_matplotlib", lambda: False)  # as the renderer sees it
    text = render_html(result)
    assert "<svg" not in text and 'pip install "polarbeam[plots]"' in text
    assert "plain-b" in text


@pytest.mark.skipif(CHROMIUM is None, reason="no Chromium browser installed")
def test_renders_in_headless_chromium(report, result, tmp_path):
    out, _ = report
    url = (out / "report.html").resolve().as_uri() + "#sort=-3"  # α, descending
    args = [
        CHROMIUM,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
        f"--user-data-dir={tmp_path / 'profile'}",
    ]
    dom = subprocess.run(
        [*args, "--dump-dom", url], capture_output=True, text=True, timeout=120, check=True
    ).stdout
    assert 'data-sortable="ready"' in dom  # the inline script ran
    assert len(re.findall(r"<script\b", dom)) == 1  # the compound name did not become a tag
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in dom
    body = dom[dom.index('id="summary-table"') :]
    body = body[: body.index("</table>")]
    order = re.findall(r'<tr><td class="num" data-v="(\d+)">', body)
    alphas = [c.row()["alpha_A3"] for c in result.compounds]
    # descending α, compounds without α (single temperature) last
    want = sorted(range(3), key=lambda i: (alphas[i] is None, -(alphas[i] or 0.0)))
    assert want != [0, 1, 2]  # the sort must actually have moved rows
    assert [int(i) - 1 for i in order] == want
    shot = tmp_path / "page.png"
    subprocess.run(
        [*args, f"--screenshot={shot}", "--window-size=1200,900", url],
        capture_output=True,
        timeout=120,
        check=True,
    )
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and shot.stat().st_size > 10_000
