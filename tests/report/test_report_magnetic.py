"""A magnetic campaign's report speaks magnetism: report.html, report.md, report.tex and
results.json of examples/magnetic show χ_eff, χ_dia (cm³/mol), the moment (μ_B) and currents (A),
never the α/μ stand-ins the electric fits ran on (Å³, D, polarizabilities, voltages)."""

from __future__ import annotations

import csv
import json
import math
import re
from pathlib import Path

import numpy as np
import pytest

from polarbeam._util.optional import missing_reason
from polarbeam.batch.records import encode_compound
from polarbeam.batch.workers import render_chunk
from polarbeam.pipeline.analysis import analyze
from polarbeam.quantities import format_value_error, value_error_text

pytest.importorskip("matplotlib", reason=missing_reason("matplotlib"))

from polarbeam.report.magnetic_html import curie_figure, magnetic_series_figure

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "magnetic" / "campaign.toml"
#: what an electric report says and a magnetic one must not
FORBIDDEN = ("Å³", "polarizab", " D)", "voltage", "α", "Debye", "kilovolt")


@pytest.fixture(scope="module")
def magnetic(tmp_path_factory):
    out = tmp_path_factory.mktemp("magnetic")
    result = analyze(EXAMPLE, out=out)
    assert result.deflector_field == "magnetic"
    assert all(c.status != "failed" for c in result.compounds)
    return result, out


def _rows(path: Path) -> list[dict[str, str]]:
    with path.open(encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


@pytest.mark.parametrize("name", ["report.md", "report.html", "report.tex"])
def test_no_electric_words_in_the_magnetic_report(magnetic, name):
    _, out = magnetic
    text = (out / name).read_text(encoding="utf-8")
    for word in FORBIDDEN:
        assert word.lower() not in text.lower(), (name, word)


def test_magnetic_numbers_appear_in_markdown_and_html(magnetic):
    result, out = magnetic
    md = (out / "report.md").read_text(encoding="utf-8")
    page = (out / "report.html").read_text(encoding="utf-8")
    props = {r["compound"]: r for r in _rows(out / "properties.csv")}
    series = _rows(out / "series.csv")
    for c in result.compounds:
        p = props[c.compound]
        chi = value_error_text(
            float(p["chi_dia_cm3_mol"]) * 1e6, float(p["chi_dia_err_cm3_mol"]) * 1e6
        )
        assert f"**χ_dia = {chi} ×10⁻⁶ cm³/mol**" in md
        shown = format_value_error(
            float(p["chi_dia_cm3_mol"]) * 1e6, float(p["chi_dia_err_cm3_mol"]) * 1e6
        )
        assert f"χ_dia = {shown} ×10⁻⁶ cm³/mol" in page
        if p["moment_muB"]:
            m = value_error_text(float(p["moment_muB"]), float(p["moment_err_muB"]))
            assert f"**moment = {m} μ_B**" in md
            assert "moment = " in page and " μ_B" in page
        else:
            assert f"**moment < {float(p['moment_upper_muB']):.3g} μ_B**" in md
    for r in series:
        chi = value_error_text(
            float(r["chi_eff_cm3_mol"]) * 1e6, float(r["chi_eff_err_cm3_mol"]) * 1e6
        )
        assert f"| {chi} |" in md, r["compound"]
    assert "| I (A) | measured |" in md and "versus current" in md
    assert '<th class="num">I (A)</th>' in page
    assert "χ_dia (10⁻⁶ cm³/mol)" in page and "moment (μ_B)" in page
    assert "B·∂B/∂x" in page
    assert "correlation of χ_dia and C" in page
    # the figures: series against current² and the Curie plot, for every compound
    figs = {f.name for f in (out / "figures").iterdir()}
    for kind in ("series", "curie"):
        assert sum(n.endswith(f"-{kind}.svg") for n in figs) == len(result.compounds), kind
    assert not any(n.endswith("-debye.svg") for n in figs)


def test_results_json_holds_magnetic_blocks_only(magnetic):
    _, out = magnetic
    doc = json.loads((out / "results.json").read_text(encoding="utf-8"))
    assert doc["campaign"]["field"] == "magnetic"
    props = {r["compound"]: r for r in _rows(out / "properties.csv")}
    series = {(r["compound"], float(r["temperature_K"])): r for r in _rows(out / "series.csv")}
    # SI rationalised molar susceptibility = 4π·10⁻⁶ × CGS-emu (textbook: Kahn, Molecular
    # Magnetism, ch. 1)
    si_per_cgs = 4 * math.pi * 1e-6
    for c in doc["compounds"]:
        stand_ins = {k for k in c if k.startswith(("alpha", "dipole", "mean_square_dipole"))}
        assert not stand_ins and "debye_fit" not in c
        p = props[c["compound"]]
        chi = c["chi_dia"]
        assert chi["cm3_mol"] == pytest.approx(float(p["chi_dia_cm3_mol"]), rel=1e-9)
        assert chi["err_cm3_mol"] == pytest.approx(float(p["chi_dia_err_cm3_mol"]), rel=1e-9)
        assert chi["m3_mol"] == pytest.approx(si_per_cgs * chi["cm3_mol"], rel=1e-12)
        assert chi["err_m3_mol"] == pytest.approx(si_per_cgs * chi["err_cm3_mol"], rel=1e-12)
        m = c["moment"]
        assert set(m) >= {"muB", "err_muB", "upper_muB", "interval_muB", "interval_cl", "limit_cl"}
        if p["moment_muB"]:
            assert m["muB"] == pytest.approx(float(p["moment_muB"]), rel=1e-9)
            lo, hi = m["interval_muB"]
            assert lo <= m["muB"] <= hi
            assert [lo, hi] == pytest.approx(
                [float(p["moment_lo_muB"]), float(p["moment_hi_muB"])], rel=1e-9
            )
        else:
            assert m["muB"] is None
            assert m["upper_muB"] == pytest.approx(float(p["moment_upper_muB"]), rel=1e-9)
        assert sum(c["chi_dia_budget"].values()) == pytest.approx(1.0)
        # C = 0.12505 μ_eff² cm³ K/mol (Kahn, ch. 1) for a compound with a moment
        cc = c["curie_constant"]["cm3_K_mol"]
        if m["muB"] is not None:
            assert cc == pytest.approx(0.12505 * m["muB"] ** 2, rel=2e-4)
        for s in c["series"]:
            assert "alpha_eff" not in s and "budget" not in s
            r = series[(c["compound"], s["temperature_K"])]
            assert s["chi_eff"]["cm3_mol"] == pytest.approx(float(r["chi_eff_cm3_mol"]), rel=1e-9)
            assert s["chi_eff"]["m3_mol"] == pytest.approx(
                si_per_cgs * s["chi_eff"]["cm3_mol"], rel=1e-12
            )
            assert s["chi_eff"]["err_m3_mol"] == pytest.approx(
                si_per_cgs * s["chi_eff"]["err_cm3_mol"], rel=1e-12
            )
            assert all("current_A" in pt and "voltage_V" not in pt for pt in s["points"])
    assert doc["cautions"][0].startswith("Strong electromagnets")


def test_series_figure_is_against_current_squared(magnetic):
    result, _ = magnetic
    c = result.compounds[1]
    fig = magnetic_series_figure(c)
    ax, rax = fig.axes[:2]
    assert "I²" in rax.get_xlabel() and "A²" in rax.get_xlabel()
    curves = [ln for ln in ax.get_lines() if ln.get_gid() == "model"]
    assert len(curves) == len(c.series)
    for ln, s in zip(curves, c.series, strict=True):
        x, y = np.asarray(ln.get_xdata()), np.asarray(ln.get_ydata())
        assert x.max() == pytest.approx(float(np.max(s.voltages)) ** 2)
        # the curve passes through the fitted model at the measured currents
        at = np.interp(s.voltages**2, x, y)
        assert np.max(np.abs(at - s.model)) < 0.02 * float(np.ptp(s.model))


def test_curie_figure_draws_chi_dia_at_zero_and_the_line_through_the_points(magnetic):
    result, _ = magnetic
    for c in result.compounds:
        fig = curie_figure(c)
        ax = fig.axes[0]
        assert c.compound in ax.get_title() and ax.get_ylabel() == "χ_eff (10⁻⁶ cm³/mol)"
        (line,) = [ln for ln in ax.get_lines() if ln.get_label() == "χ_dia + C/T"]
        x, y = np.asarray(line.get_xdata()), np.asarray(line.get_ydata())
        assert x[0] == 0.0 and y[0] == pytest.approx(c.extra["chi_dia_cm3_mol"] * 1e6)
        for s in c.series:  # the fitted line is within 3σ of each χ_eff
            at = np.interp(1e3 / s.temperature_K, x, y)
            chi, err = (s.extra[k] * 1e6 for k in ("chi_eff_cm3_mol", "chi_eff_err_cm3_mol"))
            assert abs(at - chi) < 3 * err, (c.compound, s.temperature_K)
        labels = [t.get_text() for t in ax.get_legend().get_texts()]
        assert any(re.match(r"moment (=|<) ", t) for t in labels)


def test_failed_and_single_temperature_compounds_stay_magnetic(tmp_path):
    """A compound that fails (negative current) and one measured at one temperature only: the
    report still shows no stand-ins, and the single series keeps its χ_eff."""
    src = EXAMPLE.parent
    for name in ("campaign.toml", "compounds.csv"):
        (tmp_path / name).write_text((src / name).read_text(encoding="utf-8"), encoding="utf-8")
    rows = _rows(src / "shifts.csv")
    first = next(i for i, r in enumerate(rows) if r["compound"] == "MG-301")
    rows[first]["current_A"] = "-0.5"
    rows = [r for r in rows if r["compound"] != "MG-201" or float(r["temperature_K"]) == 300]
    with (tmp_path / "shifts.csv").open("w", newline="", encoding="utf-8") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    out = tmp_path / "out"
    result = analyze(tmp_path / "campaign.toml", out=out)
    status = {c.compound: c.status for c in result.compounds}
    assert status["MG-301"] == "failed" and status["MG-201"] != "failed"
    for name in ("report.md", "report.html", "report.tex"):
        text = (out / name).read_text(encoding="utf-8").lower()
        assert not [w for w in FORBIDDEN if w.lower() in text], name
    doc = json.loads((out / "results.json").read_text(encoding="utf-8"))
    by = {c["compound"]: c for c in doc["compounds"]}
    assert not any(k.startswith(("alpha", "dipole")) for c in by.values() for k in c)
    assert "current_A" in by["MG-301"]["message"]
    single = by["MG-201"]
    assert single["chi_dia"]["cm3_mol"] is None and single["moment"]["muB"] is None
    (s,) = single["series"]
    assert s["chi_eff"]["cm3_mol"] is not None and s["chi_eff"]["err_cm3_mol"] > 0
    md = (out / "report.md").read_text(encoding="utf-8")
    chi = value_error_text(s["chi_eff"]["cm3_mol"] * 1e6, s["chi_eff"]["err_cm3_mol"] * 1e6)
    assert f"| {chi} |" in md


def test_batch_workers_draw_the_magnetic_figures(magnetic):
    """Figures made in worker processes (batch.workers.render_chunk) from compound records are
    the magnetic ones, as the page made in-process draws them."""
    result, _ = magnetic
    items = [(i, encode_compound(c)) for i, c in enumerate(result.compounds)]
    got = dict(render_chunk(items, True))
    for i, c in enumerate(result.compounds):
        assert set(got[i]) == {"series", "curie", "budget"}, c.compound
        svg, png = got[i]["curie"]
        assert svg.lstrip().startswith(("<?xml", "<svg")) and png[:4] == b"\x89PNG"
    assert "debye" in dict(render_chunk(items[:1]))[0]  # the electric default is unchanged


def test_notebook_table_of_a_magnetic_campaign(magnetic):
    result, out = magnetic
    page = result._repr_html_()
    assert "χ_dia (10⁻⁶ cm³/mol)" in page and "moment (μ_B)" in page
    assert not [w for w in FORBIDDEN if w.lower() in page.lower()]
    props = {r["compound"]: r for r in _rows(out / "properties.csv")}
    for c in result.compounds:
        p = props[c.compound]
        shown = format_value_error(
            float(p["chi_dia_cm3_mol"]) * 1e6, float(p["chi_dia_err_cm3_mol"]) * 1e6
        )
        assert f"<td>{shown}</td>" in page
