"""report.tex: the properties table for a paper (two significant digits on the error, limits with
their confidence level, names escaped so any compound name compiles)."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from polarbeam.pipeline.analysis import analyze
from polarbeam.report.latex import latex_escape, latex_table

DEMO = Path(__file__).resolve().parents[2] / "examples" / "demo" / "campaign.toml"
SPECIAL = set("&%$#_{}~^\\")


@pytest.fixture(scope="module")
def demo():
    return analyze(DEMO)


def test_rows_carry_the_properties_table(demo):
    tex = latex_table(demo)
    rows = [ln for ln in tex.splitlines() if ln.startswith("DM-")]
    assert len(rows) == sum(c.status != "failed" for c in demo.compounds)
    for c in demo.compounds:
        if c.status == "failed":
            continue
        (line,) = [ln for ln in rows if ln.startswith(c.compound + " ")]
        cells = [x.strip() for x in line.rstrip("\\ ").split("&")]
        if c.alpha_A3 is not None:
            value, err = re.fullmatch(r"\$(\S+) \\pm (\S+)\$", cells[1]).groups()
            assert float(value) == pytest.approx(c.alpha_A3, abs=float(err) / 10)
            # two significant digits on the error (common practice for quoting a result)
            assert len(err.replace(".", "").lstrip("0")) == 2
        if c.dipole_upper_D is not None:
            assert cells[2] == f"$<{c.dipole_upper_D:.2f}$"
    assert r"95\% confidence" in tex
    assert tex.count(r"\begin{tabular}") == tex.count(r"\end{tabular}") == 1


def test_report_folder_has_the_table(demo, tmp_path):
    demo.to_report(tmp_path, html=False)
    assert (tmp_path / "report.tex").read_text(encoding="utf-8") == latex_table(demo)


@given(st.text(max_size=40))
def test_escaped_text_has_no_bare_special_characters(text):
    out = latex_escape(text)
    # remove the escapes we emit; nothing special may remain
    rest = re.sub(
        r"\\textbackslash\{\}|\\textasciitilde\{\}|\\textasciicircum\{\}|\\[&%$#_{}]", "", out
    )
    assert not (set(rest) & SPECIAL), (text, out)
    assert "\n" not in out
