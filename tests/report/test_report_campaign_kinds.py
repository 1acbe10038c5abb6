"""Every example campaign kind gets a full report.html (opened in headless Chromium), the files that
apply and no others; the figures hold their error bars, name their compound and draw a smooth
model curve."""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

from polarbeam._util.optional import missing_reason
from polarbeam.pipeline.analysis import analyze

pytest.importorskip("matplotlib", reason=missing_reason("matplotlib"))

from matplotlib.collections import LineCollection

from polarbeam.report import figures
from polarbeam.report.campaign_figures import drift_figure, optical_figure, recoil_fit_figure

ROOT = Path(__file__).resolve().parents[2]
EXAMPLES = ROOT / "examples"
CHROMIUM = next(
    (
        p
        for p in ("/usr/bin/chromium", shutil.which("chromium"), shutil.which("chromium-browser"))
        if p and Path(p).exists()
    ),
    None,
)
KINDS = [
    "demo",
    "demo_scans",
    "timedomain",
    "recoil",
    "recoil/cw",
    "visibility",
    "supersonic",
    "magnetic",
]
KINDS = [k for k in KINDS if (EXAMPLES / k / "campaign.toml").exists()]


@pytest.fixture(scope="module", params=KINDS)
def report(request, tmp_path_factory):
    kind = request.param
    out = tmp_path_factory.mktemp(kind.replace("/", "-"))
    result = analyze(EXAMPLES / kind / "campaign.toml", out=out)
    return kind, result, out


def _section(dom: str, sid: str) -> str:
    """The inner HTML of ``<section id=sid>`` (nested sections included)."""
    m = re.search(rf'<section[^>]*id="{sid}"[^>]*>', dom)
    assert m, f"section #{sid} missing"
    depth, pos = 1, m.end()
    for tag in re.finditer(r"<(/?)section\b", dom[pos:]):
        depth += -1 if tag.group(1) else 1
        if depth == 0:
            return dom[pos : pos + tag.start()]
    raise AssertionError(f"section #{sid} is not closed")


def _text(fragment: str) -> str:
    return re.sub(r"\s+", " ", re.sub(r"<[^>]+>", " ", fragment)).strip()


def _dom(path: Path, tmp: Path) -> str:
    if CHROMIUM is None:
        return path.read_text(encoding="utf-8")
    args = [
        CHROMIUM,
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
        f"--user-data-dir={tmp / 'profile'}",
        "--dump-dom",
        path.resolve().as_uri(),
    ]
    return subprocess.run(args, capture_output=True, text=True, timeout=120, check=True).stdout


@pytest.mark.slow
def test_every_kind_has_a_full_report(report, tmp_path):
    kind, result, out = report
    dom = _dom(out / "report.html", tmp_path)
    if CHROMIUM is not None:
        assert 'data-sortable="ready"' in dom  # the page's script ran in the browser
    for sid in ("summary", "inputs", "provenance", "method", "cautions"):
        assert len(_text(_section(dom, sid))) > 40, sid
    inputs = _section(dom, "inputs")
    assert "<td><code>instrument.grating_period</code></td>" in inputs
    assert re.search(r"<td>(stated|default)</td>", inputs)
    prov = _section(dom, "provenance")
    assert re.search(r"<code>[0-9a-f]{64}</code>", prov)  # SHA-256 of an input file
    assert "numpy" in prov and "scipy" in prov
    files = {p.name for p in out.iterdir()}
    figs = {p.name for p in (out / "figures").iterdir()} if (out / "figures").exists() else set()
    recoil = getattr(result, "recoil", None)
    optical = getattr(result, "optical", None)
    if result.compounds:
        assert {"series.csv", "properties.csv"} <= files
        comp = _section(dom, "compounds")
        for c in result.compounds:
            assert c.compound in comp
        assert "<details" in comp and "residual/σ" in comp  # per-point tables, collapsed
        if result.deflector_field == "magnetic":  # χ, moments, currents (report/magnetic_html)
            assert "correlation of χ_dia and C" in comp and "I (A)" in comp
            assert "uncertainty budget of the moment" in comp
            for word in ("Å³", "polarizab", " D)", "voltage", "α"):
                assert word.lower() not in _text(dom).lower(), word
            assert any(n.endswith("-curie.svg") for n in figs)
        elif any(c.alpha_mu2_correlation is not None for c in result.compounds):
            assert "correlation of α and ⟨μ²⟩" in comp
            assert "uncertainty budget of μ" in comp or "uncertainty budget of ⟨μ²⟩" in comp
        assert any(n.endswith("-series.svg") for n in figs)
    else:  # recoil or visibility only: none of the deflection tables, nothing empty
        assert not {"series.csv", "properties.csv"} & files
        assert "0 compound(s)" not in dom
    if recoil is not None:
        sec = _section(dom, "recoil")
        rows = re.findall(r"<tr><td>", sec)
        assert len(rows) >= len(recoil.compounds)
        for c in recoil.compounds:
            assert c.compound in sec
        assert "recoil.csv" in files
        assert not (out / "recoil_spectrum.png").exists()  # figures live in figures/
        if len(recoil.lasers) >= 2:
            assert {"recoil_spectrum.png", "recoil_spectrum.svg"} <= figs
        assert "<svg" in sec
    if optical is not None:
        sec = _section(dom, "optical")
        for c in optical.compounds:
            assert c.compound in sec
        assert "<svg" in sec and "optical.csv" in files
        assert not (out / "visibility.png").exists()
    if kind == "demo_scans":
        sec = _section(dom, "drift")
        assert 'id="noise-table"' in sec and "<svg" in sec
        assert any(n.startswith("drift-") and n.endswith(".svg") for n in figs)
    if kind == "demo":  # computed chemistry: the parity table in HTML, not only in Markdown
        sec = _section(dom, "computed")
        assert 'id="parity-table"' in sec and 'id="computed-table"' in sec and "<svg" in sec
        assert "parity.svg" in figs
    for f in (out / "figures").glob("*.png") if figs else ():
        assert f.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert f.with_suffix(".svg").exists() or f.name == "visibility.png"


# ---------------------------------------------------------------- figures


def _errorbar_extents(ax):
    """(x lo, x hi, y lo, y hi) over every error-bar segment drawn on ``ax``."""
    xs, ys = [], []
    for coll in ax.collections:
        if isinstance(coll, LineCollection):
            for seg in coll.get_segments():
                seg = np.asarray(seg)
                if seg.size:
                    xs += list(seg[:, 0])
                    ys += list(seg[:, 1])
    return min(xs), max(xs), min(ys), max(ys)


def _holds_errorbars(ax):
    x0, x1, y0, y1 = _errorbar_extents(ax)
    xl, yl = sorted(ax.get_xlim()), sorted(ax.get_ylim())
    return xl[0] <= x0 and x1 <= xl[1] and yl[0] <= y0 and y1 <= yl[1]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return analyze(EXAMPLES / "demo" / "campaign.toml")


def test_series_figure_draws_a_smooth_curve(demo):
    c = next(c for c in demo.compounds if c.series)
    fig = figures.series_figure(c)
    ax, rax = fig.axes[:2]
    curves = [ln for ln in ax.get_lines() if ln.get_gid() == "model"]
    assert len(curves) == len(c.series)
    for ln, s in zip(curves, c.series, strict=True):
        x = np.asarray(ln.get_xdata())
        assert x.size >= 100
        assert x.min() == pytest.approx(s.voltages.min()) and x.max() == pytest.approx(
            s.voltages.max()
        )
        # the curve passes through the model at the measured voltages
        y = np.asarray(ln.get_ydata())
        order = np.argsort(s.voltages)
        scale = 1e6 if s.observable.startswith("shift") else 1.0
        at = np.interp(s.voltages[order], x, y)
        span = float(np.ptp(s.model)) * scale
        assert np.max(np.abs(at - s.model[order] * scale)) < 0.02 * span
    # residuals as points only, no joining lines
    assert all(ln.get_linestyle() in ("None", "none", "") for ln in rax.get_lines()[: len(curves)])
    assert c.compound in ax.get_title()
    assert _holds_errorbars(ax)


def test_debye_figure_shows_alpha_at_zero_and_residuals(demo):
    c = next(c for c in demo.compounds if figures.debye_figure(c) is not None)
    fig = figures.debye_figure(c)
    ax, rax = fig.axes[:2]
    assert c.compound in ax.get_title()
    assert rax.get_xlabel() == "10³/T (K⁻¹)" and "residual" in rax.get_ylabel()
    assert _holds_errorbars(ax)  # includes α's error bar at 1/T = 0
    x0, _, _, _ = _errorbar_extents(ax)
    assert x0 == pytest.approx(0.0, abs=1e-12)
    assert ax.get_xlim()[0] < 0.0  # the bar at 1/T = 0 is not cut by the frame
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any(t.startswith("μ") for t in labels)
    assert any("1σ" in t for t in labels)


def test_parity_figure_labels_every_compound(demo):
    fig = figures.parity_figure(demo)
    assert fig is not None
    ax = fig.axes[0]
    assert ax.get_aspect() == 1.0
    assert _holds_errorbars(ax)
    labelled = {t.get_text() for t in ax.texts}
    shown = {
        c.compound
        for c in demo.compounds
        if c.alpha is not None and figures.predictions(c)["alpha"]
    }
    assert shown and shown <= labelled


def test_parity_figure_has_hover_labels_in_the_svg(demo):
    """The inline SVG of report.html gives each parity point a <title> (a hover label) naming
    its compound and both values."""
    fig = figures.parity_figure(demo)
    titles = re.findall(r"<title>([^<]*)</title>", figures.to_svg(fig))
    shown = {
        c.compound
        for c in demo.compounds
        if c.alpha is not None and figures.predictions(c)["alpha"]
    }
    assert shown and shown <= {t.split(":")[0] for t in titles}
    assert all(" Å³, " in t and t.startswith(tuple(shown)) for t in titles)
    assert all("measured " in t and " ± " in t for t in titles)


def test_every_compound_figure_names_its_compound(demo):
    for c in demo.compounds:
        for kind, fig in figures.compound_figures(c).items():
            assert c.compound in fig.axes[0].get_title(), kind


@pytest.mark.slow
def test_other_kinds_figures_name_their_compound(tmp_path):
    rec = analyze(EXAMPLES / "recoil" / "campaign.toml").recoil
    for c in rec.compounds:
        fig = recoil_fit_figure(c)
        if fig is not None:
            assert c.compound in fig.axes[0].get_title()
    vis = analyze(EXAMPLES / "visibility" / "campaign.toml").optical
    for c in vis.compounds:
        fig = optical_figure(c)
        if fig is not None:
            assert c.compound in fig.axes[0].get_title()
            assert _holds_errorbars(fig.axes[0])
    scans = analyze(EXAMPLES / "demo_scans" / "campaign.toml")
    key = next(iter(scans.reduction.covariance))
    fig = drift_figure(scans.reduction, key)
    assert key[0] in fig.axes[0].get_title()
    assert _holds_errorbars(fig.axes[0])
    assert any("excess noise" in t.get_text() for t in fig.axes[0].get_legend().get_texts())


def test_png_is_300_dpi(demo):
    from PIL import Image  # matplotlib depends on Pillow

    fig = figures.budget_figure(demo.compounds[0])
    import io

    im = Image.open(io.BytesIO(figures.to_png(fig)))
    assert round(im.info["dpi"][0]) == 300
